// Package viz draws pictures from data: first-layer filter tiles,
// activation-map grids and overlays, occlusion heatmaps, colour maps, colour
// bars, composed panels and the one-page report.
//
// The window and the command-line mode both call viz. It imports no GUI
// package and no model runtime (a test checks both with go list -deps): the
// analyses that run a model live in the sub-package analysis and hand their
// results here as plain data.
//
// # Pictures
//
// Every drawing function returns a new *image.NRGBA whose bounds start at
// (0, 0) and never modifies its inputs. Pictures are deterministic: the same
// input gives the same pixels, byte for byte (golden files in
// testdata/golden check it). Colours come from two tabulated maps of our own,
// [Sequential] (perceptually uniform, for magnitudes) and [Diverging]
// (centred on a neutral zero, blue below and orange above, for signed values);
// both stay readable on light and dark backgrounds and for the common colour
// vision deficiencies.
//
// Sizes come from data (kernel and tensor shapes), so a bad size is an error:
// functions that may meet one return it and never a silently empty picture.
// The few primitives without an error result ([OverlayScores], [ColorBar])
// panic with a message naming the problem when called with sizes that a
// correct caller never passes.
//
// # Tensors
//
// Activation tensors are modelio.Tensor values: float32, row-major, for one
// layer, in the model's layout, either NCHW ([n][c][h][w]) or NHWC
// ([n][h][w][c]); the layout is passed beside the tensor as "nchw" or "nhwc".
// Kernels are modelio.Kernels, [M][C][kH][kW] row-major.
//
// # Security Considerations
//
// Shapes come from model files, which are not trusted. Every function checks
// that the data length matches the shape and that the picture it is about to
// allocate stays below [MaxPixels] before allocating it.
package viz
