//go:build !cgo

package prep

// haveCInflate says whether this build inflates through a C library: not
// without cgo, where compress/zlib does all the inflating.
const haveCInflate = false

func inflateC(src, dst []byte) (used int, ok bool) { panic("prep: inflateC without cgo") }
