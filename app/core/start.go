package core

import "fovea/modelio/infer"

// Start finds the ONNX Runtime shared library and loads it, once per process.
// ortLib is the user's --ort-lib value ("" = search $FOVEA_ORT_LIB, the user
// cache and the system folders). When the library is missing or unusable the
// error is an *infer.LibraryError naming the file and the fetch command; show
// it as it is. Calling Start again with the same argument is harmless.
func Start(ortLib string) error {
	p, err := infer.FindLibrary(ortLib)
	if err != nil {
		return err
	}
	return infer.Init(p)
}

// Library returns the path of the library Start loaded, or "" before that
// (infer.Loaded: the runtime package keeps the one record of it).
func Library() string { return infer.Loaded() }
