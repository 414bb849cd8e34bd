package infer

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The lookup order is the one documented in README.md and issue 2:
// --ort-lib, then $FOVEA_ORT_LIB, then the cache, then the system paths.
func TestFindLibraryOrder(t *testing.T) {
	dir := t.TempDir()
	flagLib := filepath.Join(dir, "flag.so")
	envLib := filepath.Join(dir, "env.so")
	for _, p := range []string{flagLib, envLib} {
		if err := os.WriteFile(p, []byte("\x7fELF"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	t.Setenv(EnvLibrary, envLib)
	if got, err := FindLibrary(flagLib); err != nil || got != flagLib {
		t.Errorf("flag given: got %q, %v; want %q", got, err, flagLib)
	}
	if got, err := FindLibrary(""); err != nil || got != envLib {
		t.Errorf("env given: got %q, %v; want %q", got, err, envLib)
	}
	t.Setenv("XDG_CACHE_HOME", filepath.Join(dir, "cache"))
	t.Setenv(EnvLibrary, "")
	cache, err := CachePath()
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(cache, filepath.Join(dir, "cache", "fovea")) {
		t.Fatalf("cache path %q is not under the user cache folder", cache)
	}
	if err := os.MkdirAll(filepath.Dir(cache), 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(cache, []byte("\x7fELF"), 0o644); err != nil {
		t.Fatal(err)
	}
	if got, err := FindLibrary(""); err != nil || got != cache {
		t.Errorf("cache only: got %q, %v; want %q", got, err, cache)
	}
}

// A path the user gave that does not exist is reported with the path and the
// fetch command (issue 2 acceptance), never replaced by another library.
func TestFindLibraryMissingExplicit(t *testing.T) {
	for _, tc := range []struct{ flag, env string }{
		{"/nonexistent/libonnxruntime.so.1", ""},
		{"", "/nonexistent/env-lib.so"},
	} {
		t.Setenv(EnvLibrary, tc.env)
		_, err := FindLibrary(tc.flag)
		var le *LibraryError
		if !errors.As(err, &le) {
			t.Fatalf("FindLibrary(%q) with env %q: got %v, want *LibraryError", tc.flag, tc.env, err)
		}
		want := tc.flag + tc.env
		if msg := err.Error(); !strings.Contains(msg, want) || !strings.Contains(msg, FetchCommand) {
			t.Errorf("message %q should name %q and %q", msg, want, FetchCommand)
		}
	}
}

func TestFindLibraryNothingAnywhere(t *testing.T) {
	dir := t.TempDir()
	t.Setenv(EnvLibrary, "")
	t.Setenv("XDG_CACHE_HOME", dir)
	t.Setenv("LD_LIBRARY_PATH", "")
	saved := systemDirs
	systemDirs = []string{filepath.Join(dir, "none")}
	defer func() { systemDirs = saved }()
	_, err := FindLibrary("")
	var le *LibraryError
	if !errors.As(err, &le) || len(le.Tried) < 2 {
		t.Fatalf("got %v, want *LibraryError listing the places tried", err)
	}
}

// ELF files start with 0x7f 'E' 'L' 'F' (System V ABI, ELF header e_ident).
func TestCheckELF(t *testing.T) {
	dir := t.TempDir()
	text := filepath.Join(dir, "notes.txt")
	if err := os.WriteFile(text, []byte("not a library"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := checkELF(text); err == nil || !strings.Contains(err.Error(), "no ELF header") {
		t.Errorf("text file: got %v", err)
	}
	empty := filepath.Join(dir, "empty.so")
	if err := os.WriteFile(empty, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	if err := checkELF(empty); err == nil {
		t.Error("empty file accepted as a library")
	}
}

func TestVersionAtLeast(t *testing.T) {
	for _, tc := range []struct {
		v    string
		want bool
	}{
		{"1.24.3", true}, {"1.25.0", true}, {"2.0.0", true},
		{"1.23.2", false}, {"1.9.0", false}, {"", false}, {"x.y", false},
	} {
		if got := versionAtLeast(tc.v, 1, 24); got != tc.want {
			t.Errorf("versionAtLeast(%q, 1, 24) = %v, want %v", tc.v, got, tc.want)
		}
	}
}
