package onnxbuild

// VGG16 builds configuration D of Simonyan & Zisserman, "Very Deep
// Convolutional Networks for Large-Scale Image Recognition" (ICLR 2015):
// thirteen 3×3 convolutions (stride 1, padding 1) in blocks of
// 64-64, 128-128, 256×3, 512×3, 512×3 each followed by 2×2 max pooling with
// stride 2, then fully connected 4096-4096-classes, on a 224×224×3 NCHW
// input named "image" with batch dimension batch (an int or a symbolic
// name). 138,357,544 parameters for 1000 classes.
func VGG16(w Weights, batch any, classes int) *Builder {
	b := New(13, w)
	x := b.Input("image", Float, batch, 3, 224, 224)
	in := 3
	for _, block := range [][]int{{64, 64}, {128, 128}, {256, 256, 256}, {512, 512, 512}, {512, 512, 512}} {
		for _, c := range block {
			x = b.Relu(b.Conv(x, in, c, 3, 1, 1))
			in = c
		}
		x = b.MaxPool(x, 2, 2, 0)
	}
	x = b.Flatten(x)
	x = b.Relu(b.Gemm(x, 512*7*7, 4096))
	x = b.Relu(b.Gemm(x, 4096, 4096))
	x = b.Gemm(x, 4096, classes)
	b.Output(b.Softmax(x))
	return b
}

// ResNet18 builds the 18-layer residual network of He, Zhang, Ren & Sun,
// "Deep Residual Learning for Image Recognition" (CVPR 2016), Table 1:
// 7×7/2 convolution with 64 filters, 3×3/2 max pooling, four stages of two
// basic blocks (two 3×3 convolutions each) with 64, 128, 256, 512 filters,
// stages 2-4 starting with stride 2 and a 1×1/2 projection shortcut,
// global average pooling and a fully connected layer. Convolutions have no
// bias and are followed by batch normalisation, as in the common PyTorch
// definition (11,689,512 parameters for 1000 classes).
func ResNet18(w Weights, batch any, classes int) *Builder {
	b := New(13, w)
	x := b.Input("image", Float, batch, 3, 224, 224)
	x = b.ConvWith(x, ConvSpec{In: 3, Out: 64, K: 7, Stride: 2, Pad: 3, NoBias: true})
	x = b.Relu(b.BatchNorm(x, 64))
	x = b.MaxPool(x, 3, 2, 1)
	in := 64
	for stage, c := range []int{64, 128, 256, 512} {
		for blk := range 2 {
			stride := 1
			if stage > 0 && blk == 0 {
				stride = 2
			}
			short := x
			y := b.ConvWith(x, ConvSpec{In: in, Out: c, K: 3, Stride: stride, Pad: 1, NoBias: true})
			y = b.Relu(b.BatchNorm(y, c))
			y = b.ConvWith(y, ConvSpec{In: c, Out: c, K: 3, Stride: 1, Pad: 1, NoBias: true})
			y = b.BatchNorm(y, c)
			if stride != 1 || in != c {
				short = b.ConvWith(x, ConvSpec{In: in, Out: c, K: 1, Stride: stride, NoBias: true})
				short = b.BatchNorm(short, c)
			}
			x = b.Relu(b.Add(y, short))
			in = c
		}
	}
	x = b.Flatten(b.GlobalAveragePool(x))
	b.Output(b.Gemm(x, 512, classes))
	return b
}
