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
	// NCHW); the first Conv has 16·3·5·5 weights + 16 biases = 1216
	// parameters (by hand) and pads to keep 64×64.
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
	// Conv 64×64×16 1216
	// 4 ReLU layers
	// 16 filters of 3 channels, 5 × 5
}
