// Package infer runs ONNX models on the CPU through ONNX Runtime and returns
// the model's outputs together with any intermediate tensors asked for (the
// activation maps), plus the small pieces a classifier needs around a run:
// probabilities, top-k and class labels.
//
// The package wraps github.com/yalue/onnxruntime_go completely; no ONNX
// Runtime type appears in its API. [Init] loads the shared library once per
// process ([FindLibrary] and [Fetch] find or download it); [NewSession] opens
// a [modelio.Model], rewritten with [modelio.Model.WithOutputs] when
// [Options.Capture] names intermediate tensors; [Session.Run] pushes n images
// through it and returns a [Result].
//
// # Tensors
//
// A [Tensor] is row-major float32 data with its shape beside it, in the
// model's own layout. Every tensor of a Result returned by Run starts with
// the image count: Shape[0] == n, and image i's values are the i-th of n
// equal slices of Data ([Tensor.Image]). An output that the model produces
// without a batch dimension gets one. The input to Run is n images in the
// model's input layout (NCHW [n][c][h][w] or NHWC [n][h][w][c]), one after
// the other.
//
// # Batching
//
// When the model's batch dimension is symbolic, Run sends the images in
// chunks of [Session.BatchSize]: large enough for the matrix kernels to be
// efficient, small enough that a chunk's input, captured maps and working
// memory stay within a fixed budget. A batch fixed at 1 is a loop; a batch
// fixed at k > 1 sends chunks of k (the last one padded with zeros). The
// context is checked between chunks and ONNX Runtime is asked to stop within
// a chunk when it is cancelled.
//
// # Speed
//
// Input chunks are handed to ONNX Runtime where they lie in the caller's
// slice, and after the first chunk of a given size, when the output shapes
// are known, the runtime writes outputs and activation maps straight into
// the Result's slices: no copy between Go and C memory on the hot path.
// [Session.RunInto] reuses a previous Result's slices as well.
//
// # Security Considerations
//
// ONNX Runtime is C++ and trusts the model more than this program does: a
// model declaring absurd dimensions can make it spin for minutes or abort
// the process. So [NewSession] checks the declared shapes with
// [modelio.Model.CheckRunnable] before any session is opened, and [Session.Run]
// checks the input length against the shape, the element types (float32
// only) and the memory a run will need against the memory available, before
// any data reaches the runtime. Errors the runtime reports are returned as
// [*RuntimeError] naming the node and operator when the runtime's message
// does.
package infer
