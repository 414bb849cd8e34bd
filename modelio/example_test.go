package modelio_test

import (
	"fmt"

	"fovea/modelio"
)

// Opening a model and reading its layer table: the demo classifier of
// package assets, a small CNN for 64×64 RGB pictures of hardware parts.
func ExampleOpen() {
	m, err := modelio.Open("../assets/demo/parts.onnx")
	if err != nil {
		fmt.Println(err)
		return
	}
	// The input as package assets documents it (float32 [batch, 3, 64, 64],
	// NCHW); the first Conv has 12·3·7·7 weights + 12 biases = 1776
	// parameters (by hand), and its stride 2 with padding 3 halves 64×64 to
	// 32×32 ((64 + 2·3 − 7) / 2 + 1 = 32, rounded down).
	fmt.Println(m.Image.Name, m.Image.Layout, m.Image.Channels, m.Image.Height, m.Image.Width)
	first := m.Layers[0]
	fmt.Println(first.Op, first.WHD(), first.Params)
	fmt.Println(len(m.ReluLayers()), "ReLU layers")
	k, err := m.Kernels("") // the first convolution's filters
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(k.M, "filters of", k.C, "channels,", k.KH, "×", k.KW)

	// Output:
	// image nchw 3 64 64
	// Conv 32×32×12 1776
	// 4 ReLU layers
	// 12 filters of 3 channels, 7 × 7
}
