// Package atomicfile writes files so that a reader sees either the old file
// or the complete new one, never a part: the one implementation every
// package that writes a user's file (or a cache file) uses.
//
// A temporary file is created in the destination's folder (a rename is
// atomic only within one file system), filled, synced, given its
// permissions and renamed over the destination; the folder is synced after
// the rename so that the rename itself survives a crash (best effort). On
// any failure the temporary file is removed and the destination is left as
// it was.
package atomicfile

import (
	"bytes"
	"errors"
	"io"
	"io/fs"
	"os"
	"path/filepath"
)

// Error is a failed write. Err is the cause, stripped of the temporary
// file's name (a name the user never chose). Create is true when the
// temporary file could not be made in the folder (missing, read-only, not a
// folder): a problem of the chosen path, found before anything was written.
type Error struct {
	Path   string
	Create bool
	Err    error
}

func (e *Error) Error() string {
	if e.Create {
		return "cannot write into " + filepath.Dir(e.Path) + ": " + e.Err.Error()
	}
	return "writing " + e.Path + ": " + e.Err.Error()
}

func (e *Error) Unwrap() error { return e.Err }

// Write writes the file at path with permissions perm: write fills the
// temporary file, which replaces path only when write returned nil and the
// data reached the disk. An error from write comes back wrapped in *Error
// (errors.Is finds it).
func Write(path string, perm fs.FileMode, write func(io.Writer) error) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".*.tmp")
	if err != nil {
		return &Error{Path: path, Create: true, Err: unwrapPath(err)}
	}
	tmp := f.Name()
	werr := write(f)
	serr := f.Sync()
	cerr := f.Close()
	err = errors.Join(werr, unwrapPath(serr), unwrapPath(cerr))
	if err == nil {
		err = unwrapPath(os.Chmod(tmp, perm))
	}
	if err == nil {
		err = unwrapPath(os.Rename(tmp, path))
	}
	if err != nil {
		os.Remove(tmp)
		return &Error{Path: path, Err: err}
	}
	if d, derr := os.Open(dir); derr == nil { // make the rename itself durable; best effort
		d.Sync()
		d.Close()
	}
	return nil
}

// WriteBytes is [Write] for data already in memory.
func WriteBytes(path string, data []byte, perm fs.FileMode) error {
	return Write(path, perm, func(w io.Writer) error {
		_, err := io.Copy(w, bytes.NewReader(data))
		return err
	})
}

// unwrapPath drops the *PathError or *LinkError wrapper of an operation on
// the temporary file, whose name the user never chose. nil stays nil.
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
