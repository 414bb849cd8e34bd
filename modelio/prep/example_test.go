package prep_test

import (
	"fmt"
	"image"
	"image/color"

	"fovea/modelio/prep"
)

// Preparing an image as a model input: fit it to the input size, then write
// it into the tensor in the model's layout, range and normalisation.
func ExampleConfig_TensorFromImage() {
	c := prep.Default() // 224×224 RGB, stretch, values 0..1, NCHW
	c.Width, c.Height = 2, 2
	img := image.NewNRGBA(image.Rect(0, 0, 2, 2))
	for y := 0; y < 2; y++ {
		for x := 0; x < 2; x++ {
			img.SetNRGBA(x, y, color.NRGBA{R: 255, G: 51, B: 0, A: 255})
		}
	}
	dst := make([]float32, c.Len()) // [3][2][2]
	c.TensorFromImage(prep.Fit(img, c), dst)
	fmt.Println(c.Layout, len(dst))
	// 255/255 = 1, 51/255 = 0.2, 0/255 = 0 (by hand), one plane per channel.
	fmt.Println(dst)
	// Output:
	// nchw 12
	// [1 1 1 1 0.2 0.2 0.2 0.2 0 0 0 0]
}
