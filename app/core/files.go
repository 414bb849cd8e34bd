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
)

// WriteFile writes the file at path atomically: write fills a temporary file
// in the same folder, which replaces path only when everything was written
// and synced. On any error path is left as it was and the temporary file is
// removed.
func WriteFile(path string, write func(io.Writer) error) error {
	dir := filepath.Dir(path)
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		return inputf(path, "is a folder; give a file name")
	}
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return inputErr(path, fmt.Errorf("cannot write into %s: %w", dir, unwrapPath(err)))
	}
	tmp := f.Name()
	werr := write(f)
	serr := f.Sync()
	cerr := f.Close()
	if err := errors.Join(werr, serr, cerr); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("core: writing %s: %w", path, err)
	}
	if err := os.Chmod(tmp, 0o644); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("core: writing %s: %w", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("core: writing %s: %w", path, unwrapPath(err))
	}
	return nil
}

// unwrapPath drops the *PathError wrapper whose path is a temporary name the
// user never chose.
func unwrapPath(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	var le *os.LinkError
	if errors.As(err, &le) {
		return le.Err
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
