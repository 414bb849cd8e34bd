package core

import (
	"errors"
	"fmt"
	"fovea/viz/analysis"
	"image"
	"image/png"
	"io"
	"os"
	"path/filepath"

	"fovea/modelio/atomicfile"
)

// WriteFile writes the file at path atomically (atomicfile.Write): write
// fills a temporary file in the same folder, which replaces path only when
// everything was written and synced. On any error path is left as it was
// and the temporary file is removed. A folder that cannot take the file,
// or a path that names a folder, is an input error naming it.
func WriteFile(path string, write func(io.Writer) error) error {
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		return inputf(path, "is a folder; give a file name")
	}
	err := atomicfile.Write(path, 0o644, write)
	if ae := (*atomicfile.Error)(nil); errors.As(err, &ae) && ae.Create {
		return inputErr(path, fmt.Errorf("cannot write into %s: %w", filepath.Dir(path), ae.Err))
	}
	if err != nil {
		return fmt.Errorf("core: %w", err)
	}
	return nil
}

// unwrapPath drops the *PathError wrapper whose path the message names
// already.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// SavePNG writes img as a PNG file at path, atomically.
func SavePNG(path string, img image.Image) error {
	return WriteFile(path, func(w io.Writer) error { return png.Encode(w, img) })
}

// ProbeFiles lists the image files directly inside dir (analysis.ProbeFiles: by
// extension, hidden files skipped, sorted by name).
func ProbeFiles(dir string) ([]string, error) {
	st, err := os.Stat(dir)
	if err != nil {
		return nil, inputErr(dir, unwrapPath(err))
	}
	if !st.IsDir() {
		return nil, inputf(dir, "is not a folder")
	}
	files, err := analysis.ProbeFiles(dir)
	if err != nil {
		return nil, inputErr(dir, err)
	}
	return files, nil
}
