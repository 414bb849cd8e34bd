package infer

import (
	"archive/tar"
	"bytes"
	"compress/gzip"
	"errors"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// The lookup order is the one documented in README.md:
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
// fetch command, never replaced by another library.
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

// The lookup beside the binary, with a real file layout: this test binary is
// copied to PREFIX/bin (as `make install` and the packaged tarball place
// fovea), a file with an ELF header goes to PREFIX/lib/fovea, and the copy is
// run with an empty cache and no $FOVEA_ORT_LIB. It must report the bundled
// library, also when started through a symbolic link from another folder
// (the resolved binary's folder counts), and fall back to its own folder.
func TestFindLibraryBesideBinary(t *testing.T) {
	self, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	prefix := filepath.Join(dir, "prefix")
	bin := filepath.Join(prefix, "bin", "fovea.test")
	bundled := filepath.Join(prefix, "lib", "fovea", libFile)
	link := filepath.Join(dir, "elsewhere", "fovea.test")
	for _, d := range []string{filepath.Dir(bin), filepath.Dir(bundled), filepath.Dir(link), filepath.Join(dir, "home")} {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
	}
	data, err := os.ReadFile(self)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(bin, data, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(bundled, []byte("\x7fELF"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.Symlink(bin, link); err != nil {
		t.Fatal(err)
	}
	found := func(exe string) string {
		t.Helper()
		cmd := exec.Command(exe)
		cmd.Dir = filepath.Join(dir, "home")
		cmd.Env = []string{"FOVEA_TEST_PRINT_LIBRARY=1", "HOME=" + filepath.Join(dir, "home"),
			"XDG_CACHE_HOME=" + filepath.Join(dir, "home", "cache"), "LD_LIBRARY_PATH=", "PATH=/usr/bin:/bin"}
		out, err := cmd.CombinedOutput()
		if err != nil {
			t.Fatalf("%s: %v\n%s", exe, err, out)
		}
		for _, line := range strings.Split(string(out), "\n") {
			if p, ok := strings.CutPrefix(line, "library="); ok {
				return p
			}
		}
		t.Fatalf("%s printed no library line:\n%s", exe, out)
		return ""
	}
	if got := found(bin); got != bundled {
		t.Errorf("binary in PREFIX/bin found %q, want %q", got, bundled)
	}
	if got := found(link); got != bundled {
		t.Errorf("binary started through a link found %q, want %q", got, bundled)
	}
	// Without PREFIX/lib/fovea, a library in the binary's own folder is used.
	if err := os.RemoveAll(filepath.Join(prefix, "lib")); err != nil {
		t.Fatal(err)
	}
	own := filepath.Join(prefix, "bin", libFile)
	if err := os.WriteFile(own, []byte("\x7fELF"), 0o644); err != nil {
		t.Fatal(err)
	}
	if got := found(bin); got != own {
		t.Errorf("library beside the binary: found %q, want %q", got, own)
	}
}

// TestMain doubles as the helper that TestFindLibraryBesideBinary runs in a
// copied test binary: with FOVEA_TEST_PRINT_LIBRARY=1 it prints what
// FindLibrary finds and exits without running the tests.
func TestMain(m *testing.M) {
	if os.Getenv("FOVEA_TEST_PRINT_LIBRARY") == "1" {
		p, err := FindLibrary("")
		if err != nil {
			fmt.Printf("error=%v\n", err)
			os.Exit(1)
		}
		fmt.Printf("library=%s\n", p)
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// The npm tarball's package.json declares the licence (npm's package.json
// "license" field, an SPDX identifier); Fetch accepts only MIT, the licence
// whose text it writes beside the library.
func TestDeclaredLicense(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		json string
		ok   bool
	}{
		{`{"name":"onnxruntime-node","license":"MIT"}`, true},
		{`{"name":"onnxruntime-node","license":"Apache-2.0"}`, false},
		{`{"name":"onnxruntime-node"}`, false},
		{`not json`, false},
	} {
		tgz := filepath.Join(dir, "p.tgz")
		writeTgz(t, tgz, packageJSONEntry, tc.json)
		err := checkDeclaredLicense(tgz)
		if (err == nil) != tc.ok {
			t.Errorf("package.json %s: got %v, want ok=%v", tc.json, err, tc.ok)
		}
	}
	writeTgz(t, filepath.Join(dir, "q.tgz"), "package/README.md", "no package.json")
	if err := checkDeclaredLicense(filepath.Join(dir, "q.tgz")); err == nil || !strings.Contains(err.Error(), packageJSONEntry) {
		t.Errorf("tarball without package.json: got %v", err)
	}
}

// The licence written beside the library is the MIT License text with
// Microsoft's copyright line, as in the ONNX Runtime source repository's
// LICENSE file; an outdated file there is replaced, atomically.
func TestWriteLicense(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, LicenseFile)
	if err := os.WriteFile(p, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := writeLicense(dir); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	for _, want := range []string{"MIT License", "Copyright (c) 2018 - present Microsoft Corporation", "Permission is hereby granted, free of charge"} {
		if !strings.Contains(string(got), want) {
			t.Errorf("%s lacks %q", p, want)
		}
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Errorf("folder holds %d files after writing the licence, want 1 (no temporary file left)", len(entries))
	}
}

func writeTgz(t *testing.T, path, name, content string) {
	t.Helper()
	var buf bytes.Buffer
	zw := gzip.NewWriter(&buf)
	tw := tar.NewWriter(zw)
	if err := tw.WriteHeader(&tar.Header{Name: name, Mode: 0o644, Size: int64(len(content)), Typeflag: tar.TypeReg}); err != nil {
		t.Fatal(err)
	}
	if _, err := tw.Write([]byte(content)); err != nil {
		t.Fatal(err)
	}
	if err := errors.Join(tw.Close(), zw.Close()); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

// Loaded is the one record of the loaded library: the path Init was given.
func TestLoadedIsInitPath(t *testing.T) {
	needORT(t)
	p, err := FindLibrary("")
	if err != nil {
		t.Fatal(err)
	}
	if got := Loaded(); got != p || !Initialized() {
		t.Errorf("Loaded() = %q (initialized %v), Init was given %q", got, Initialized(), p)
	}
}
