package viz_test

import (
	"fmt"

	"fovea/modelio"
	"fovea/viz"
)

// Drawing filter tiles: three 2×2 filters of one input channel, the third
// all zero. Each tile is a 2×2 grid of 4-pixel cells in the diverging
// colour map; the zero filter is flagged.
func ExampleTiles() {
	k := &modelio.Kernels{Node: "conv", M: 3, C: 1, KH: 2, KW: 2, Group: 1, W: []float32{
		1, -1, 0.5, 0, // filter 0
		0, 2, 0, 0, // filter 1
		0, 0, 0, 0, // filter 2: pruned
	}}
	img, tiles, err := viz.Tiles(k, viz.TileOptions{Cell: 4, Gap: 2, Slice: -1, Columns: 3})
	if err != nil {
		fmt.Println(err)
		return
	}
	// Each 8-pixel tile sits in a 3-pixel ring (outline and flag frame), so
	// a box is 14 pixels; boxes and 2-pixel gaps alternate, with a gap at
	// each edge: 2 + 3·(14+2) = 50 wide, 2 + 14 + 2 = 18 high, tiles at
	// x = 2+3, +16, +16. Norms by hand: √(1+1+0.25) = 1.5, √4 = 2, 0.
	fmt.Println(img.Bounds().Dx(), "×", img.Bounds().Dy())
	for _, t := range tiles {
		fmt.Printf("filter %d: norm %.2f at %v %v\n", t.Index, t.Norm, t.Rect.Min, t.Flags)
	}
	// Output:
	// 50 × 18
	// filter 0: norm 1.50 at (5,5) []
	// filter 1: norm 2.00 at (21,5) []
	// filter 2: norm 0.00 at (37,5) [zero_kernel]
}
