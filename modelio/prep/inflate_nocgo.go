//go:build !cgo

package prep

// haveCZlib says whether this build inflates through the C zlib library: not
// without cgo, where compress/zlib does all the inflating.
const haveCZlib = false

func inflateC(src, dst []byte) (used int, ok bool) { panic("prep: inflateC without cgo") }
