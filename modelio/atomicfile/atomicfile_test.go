package atomicfile

import (
	"errors"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// onlyFiles fails unless dir holds exactly the names given (no temporary
// file left behind).
func onlyFiles(t *testing.T, dir string, names ...string) {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, e := range ents {
		got = append(got, e.Name())
	}
	if strings.Join(got, "|") != strings.Join(names, "|") {
		t.Errorf("folder holds %q, want %q", got, names)
	}
}

// A write that fails half-way leaves the old file as it was, or no file
// when there was none, and no temporary file (common practice: the
// write-then-rename pattern; POSIX rename(2) replaces the target
// atomically).
func TestFailedWriteKeepsOldFile(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "ü folder")
	if err := os.Mkdir(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, "out file.txt")
	if err := WriteBytes(path, []byte("first"), 0o644); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("disk full (simulated)")
	half := func(w io.Writer) error {
		io.WriteString(w, "ha") // part of the new content reaches the temporary file
		return boom
	}
	err := Write(path, 0o644, half)
	var ae *Error
	if !errors.Is(err, boom) || !errors.As(err, &ae) || ae.Create || !strings.Contains(err.Error(), path) {
		t.Errorf("error %v: want an *Error wrapping the writer's error and naming %s", err, path)
	}
	if got, _ := os.ReadFile(path); string(got) != "first" {
		t.Errorf("after a failed write the file holds %q, want the old %q", got, "first")
	}
	onlyFiles(t, dir, "out file.txt")

	if err := Write(filepath.Join(dir, "new.txt"), 0o644, half); err == nil {
		t.Error("failed write reported success")
	}
	onlyFiles(t, dir, "out file.txt")

	if err := WriteBytes(path, []byte("second"), 0o600); err != nil {
		t.Fatal(err)
	}
	if got, _ := os.ReadFile(path); string(got) != "second" {
		t.Errorf("file holds %q, want %q", got, "second")
	}
	if st, err := os.Stat(path); err != nil || st.Mode().Perm() != 0o600 {
		t.Errorf("mode %v (%v), want 0600", st.Mode().Perm(), err)
	}
	onlyFiles(t, dir, "out file.txt")
}

// A folder that does not exist, or a path that names a folder, fails with
// an error naming the path and no temporary name.
func TestErrorsNameThePath(t *testing.T) {
	dir := t.TempDir()
	missing := filepath.Join(dir, "no such folder", "x.png")
	err := WriteBytes(missing, nil, 0o644)
	var ae *Error
	if !errors.As(err, &ae) || !ae.Create || !errors.Is(err, fs.ErrNotExist) || !strings.Contains(err.Error(), "no such folder") {
		t.Errorf("missing folder: %v", err)
	}
	if err := WriteBytes(dir, []byte("x"), 0o644); err == nil || !strings.Contains(err.Error(), dir) || strings.Contains(err.Error(), ".tmp") {
		t.Errorf("a folder as the path: %v", err)
	}
	onlyFiles(t, dir)
}
