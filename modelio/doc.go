// Package modelio opens an ONNX model and describes it without running it.
//
// [Open] reads a file (or [Decode] a buffer) into a [Model]: the summary a
// person reads first (inputs, outputs, opsets, producer, metadata, which input
// is the image and in which layout, class labels), a layer table in execution
// order with statically inferred output shapes, parameters,
// multiply-accumulates, output memory and receptive field, and access to the weights
// ([Model.Kernels]). [Model.WithOutputs] serialises the model with extra
// graph outputs so the runtime package can capture activation maps, and
// [Model.Observe] fills the shapes static inference could not know from a
// real run.
//
// # Conventions
//
// Shapes are in the model's own layout, batch first. A [Dim] with Size -1 is
// unknown; when it has a Param it is the symbolic dimension of that name.
// Weights are returned as []float32, row-major; kernels as
// M × C/group × kH × kW. Layer counts are per image (batch 1):
//
//   - Params: the trainable values a node owns. Conv: M·C/g·kH·kW + M (bias
//     when present); Gemm and MatMul: the weight matrix plus the bias;
//     BatchNormalization: 2·C (scale and shift; the running mean and variance
//     are statistics, not trained, although the file stores them: 4·C);
//     PRelu: the slopes; Add/Sub/Mul/Div: constant operands with more than one
//     element (a bias added after MatMul), scalars are not counted.
//
//   - MACs: multiply-accumulates of the weight layers only. Conv:
//     out_h·out_w·M·(C/g)·kH·kW; Gemm/MatMul: output values × inner size.
//     Pooling, activations, normalisation, Add and the rest count 0.
//
//   - Bytes: the output tensor at float32 (4 bytes a value) for one image.
//
//   - RF and Jump: receptive field (pixels of the input image) and cumulative
//     stride, by the recurrence below.
//
// The receptive field r and jump j of layer l with kernel k, stride s and
// dilation d follow Araujo, Norris & Sim ("Computing receptive fields of
// convolutional neural networks", Distill 2019), starting from r = j = 1
// and u = 0 at the image:
//
//	r_l = r_(l-1) + (k_l − 1)·d_l·j_(l-1)
//	j_l = j_(l-1)·s_l
//	u_l = u_(l-1) − p_l·j_(l-1)
//
// where u is the first input pixel of the receptive field
// of output cell 0 (negative when it reaches into the padding) and p_l the
// padding before the start of the axis: the pads attribute, 0 for VALID,
// the ONNX split of SAME_UPPER (extra pad at the end) and SAME_LOWER (at
// the beginning), the leading pads of a Pad node. Pixel k's centre is at
// coordinate k, so the centre of cell 0 is u + (r − 1)/2 and that of cell i
// u + (r − 1)/2 + i·j (Layer.CenterY, CenterX).
//
// Elementwise layers keep the values of their input; merges (Add, Concat,
// Mul, ...) take, per axis, r, j and u of the input with the largest
// receptive field (ties: the larger jump, then the first input): the
// branch that sees most decides where a cell sits. Once the
// spatial structure is gone (global pooling, Flatten, Reshape, Gemm,
// MatMul, reductions) every value depends on the whole image, and RF and
// Jump are 0, meaning "not applicable". After Resize, ConvTranspose and
// other ops that move values between positions in ways the recurrence does
// not describe, they are 0 as well. When kernel or stride differ between
// height and width RF and Jump report the larger value, the Note gives both
// receptive fields, and RFY, RFX, JumpY, JumpX keep each axis.
//
// # Security Considerations
//
// Nothing the file claims is trusted before it is checked. Before anything is
// allocated from a claimed size, element counts are checked against the bytes
// actually present (raw_data, typed fields or the external file's length).
// External data is read only from regular files inside the model's own folder:
// absolute paths, "..", symlinks leading out and ranges past the end of the
// file are refused. Graphs are walked without recursion, so a chain of many
// thousands of nodes cannot overflow the stack, and cycles are reported.
// Declared shapes can be absurd; [Model.CheckRunnable] refuses those before a
// runtime session is opened for them.
//
// Errors name the file and the problem ("modelio: net.onnx: initializer "w":
// raw_data has 12 bytes, dims need 16") and are of type [*Error]; compare them
// with errors.Is against [ErrNotONNX], [ErrLimit], [ErrInvalid],
// [ErrExternal], [ErrUnsupported] and [ErrNotFound].
//
// # Memory
//
// [Open] reads the file into one buffer and decodes it with the generated
// protobuf types of the onnxpb package; the raw_data of every initializer
// points into that buffer instead of being copied, so the decoded model costs
// about one file size plus the graph structure. Weights are converted to
// float32 only when asked for ([Model.Kernels]). The protobuf library's
// UnmarshalAliasBuffer flag would be the natural way to ask for that, but
// google.golang.org/protobuf v1.36.12 ignores it for bytes fields (it copies
// them in consumeBytes), so the decoder splits the buffer into fields with
// protowire and hands every field except the graph's initializer raw_data to
// proto.Unmarshal (see decode.go). Tensors stored in the typed fields
// (float_data and friends) are still decoded into fresh slices by the
// generated code.
package modelio
