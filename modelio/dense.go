package modelio

import "fmt"

// Tensor is a named float32 tensor: Data holds the elements in row-major
// order, len(Data) is the product of Shape. Shapes are in the model's own
// layout, batch first.
type Tensor struct {
	Name  string
	Shape []int64
	Data  []float32
}

// Image returns the part of t that belongs to image i of a Result: the same
// shape with the first dimension set to 1, and Data a sub-slice of t.Data
// (no copy). It panics when t has no first dimension or i is out of range.
func (t Tensor) Image(i int) Tensor {
	if len(t.Shape) == 0 || i < 0 || int64(i) >= t.Shape[0] {
		panic(fmt.Sprintf("modelio: Tensor.Image(%d) of %q with shape %v", i, t.Name, t.Shape))
	}
	per := len(t.Data) / int(t.Shape[0])
	shape := append([]int64{1}, t.Shape[1:]...)
	return Tensor{Name: t.Name, Shape: shape, Data: t.Data[i*per : (i+1)*per : (i+1)*per]}
}
