package infer

import (
	"archive/tar"
	"bytes"
	"compress/gzip"
	"context"
	"crypto/sha256"
	_ "embed"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"

	ort "github.com/yalue/onnxruntime_go"

	"fovea/modelio/atomicfile"
)

// The ONNX Runtime shared library is in no Go module. The npm registry's
// onnxruntime-node package carries the Linux x64 build inside its tarball, so
// Fetch asks npm for that tarball and keeps the one file it needs.
const (
	// RuntimeVersion is the ONNX Runtime release whose C API onnxruntime_go
	// v1.27.0 is built against.
	RuntimeVersion = "1.24.3"
	npmPackage     = "onnxruntime-node@" + RuntimeVersion
	tarballEntry   = "package/bin/napi-v6/linux/x64/libonnxruntime.so.1"
	libFile        = "libonnxruntime.so.1"
	// libSHA256 is the checksum of tarballEntry in onnxruntime-node 1.24.3,
	// measured when the dependency was pinned.
	libSHA256 = "92ba8e44d31b80a34f5e805076a044122c3be1fffe0d88ed790de7267b0b2682"

	// FetchCommand is the one command that puts the library in the cache.
	FetchCommand = "fovea fetch-runtime"
	// EnvLibrary names the environment variable that points at the library.
	EnvLibrary = "FOVEA_ORT_LIB"
)

// LibraryError says that the ONNX Runtime library is missing or unusable, and
// how to get it.
type LibraryError struct {
	Path    string   // the file that was tried last, if any
	Problem string   // what is wrong with it
	Tried   []string // every place searched, in order
}

func (e *LibraryError) Error() string {
	var b strings.Builder
	b.WriteString("ONNX Runtime library ")
	if e.Path != "" {
		b.WriteString(e.Path + ": ")
	}
	b.WriteString(e.Problem)
	if len(e.Tried) > 0 {
		b.WriteString(" (looked in: " + strings.Join(e.Tried, ", ") + ")")
	}
	fmt.Fprintf(&b, "; fetch ONNX Runtime %s with: %s", RuntimeVersion, FetchCommand)
	return b.String()
}

// CachePath is where Fetch puts the library: the user's cache folder, never
// the source tree.
func CachePath() (string, error) {
	dir, err := os.UserCacheDir()
	if err != nil {
		return "", fmt.Errorf("infer: no user cache folder: %w", err)
	}
	return filepath.Join(dir, "fovea", "onnxruntime-"+RuntimeVersion, libFile), nil
}

// systemDirs are the library folders searched last, after LD_LIBRARY_PATH.
var systemDirs = []string{"/usr/local/lib", "/usr/lib/x86_64-linux-gnu", "/usr/lib64", "/usr/lib"}

// BundleDir is where an installed or packaged Fovea keeps its own copy of the
// library, relative to the folder that holds the fovea binary: `make install`
// puts the binary in PREFIX/bin and the library in PREFIX/lib/fovea, and the
// packaged tarball has the same layout under usr/local.
const BundleDir = "../lib/fovea"

// executable is os.Executable; the lookup beside the binary uses it.
var executable = os.Executable

// besideBinary returns the folders searched for a library that came with the
// running binary: BundleDir and the binary's own folder, first for the binary
// with symbolic links resolved (a link on the PATH to an unpacked tarball
// finds the tarball's library), then for the path it was started by.
func besideBinary() []string {
	exe, err := executable()
	if err != nil || exe == "" {
		return nil
	}
	var dirs []string
	add := func(bin string) {
		d := filepath.Dir(bin)
		for _, c := range []string{filepath.Clean(filepath.Join(d, BundleDir)), d} {
			if !slices.Contains(dirs, c) {
				dirs = append(dirs, c)
			}
		}
	}
	if real, err := filepath.EvalSymlinks(exe); err == nil {
		add(real)
	}
	add(exe)
	return dirs
}

// FindLibrary returns the library to load, searching in order: the flag value
// (when not empty), $FOVEA_ORT_LIB, the library that came with the binary
// (BundleDir and the binary's own folder), the cache folder, LD_LIBRARY_PATH
// and the system library folders. A path given explicitly (flag or
// environment) that does not exist is an error: falling back silently would
// hide a typo. The bundled copy comes before the cache because it is the
// release the binary was installed or packaged with.
func FindLibrary(flag string) (string, error) {
	if flag != "" {
		return explicit(flag, "--ort-lib")
	}
	if env := os.Getenv(EnvLibrary); env != "" {
		return explicit(env, "$"+EnvLibrary)
	}
	var tried []string
	for _, d := range besideBinary() {
		p := filepath.Join(d, libFile)
		if isFile(p) {
			return p, nil
		}
		tried = append(tried, d)
	}
	if p, err := CachePath(); err == nil {
		if isFile(p) {
			return p, nil
		}
		tried = append(tried, p)
	}
	var dirs []string
	for _, d := range filepath.SplitList(os.Getenv("LD_LIBRARY_PATH")) {
		if d != "" {
			dirs = append(dirs, d)
		}
	}
	dirs = append(dirs, systemDirs...)
	for _, d := range dirs {
		for _, name := range []string{libFile, "libonnxruntime.so"} {
			p := filepath.Join(d, name)
			if isFile(p) {
				return p, nil
			}
		}
		tried = append(tried, d)
	}
	return "", &LibraryError{Problem: "not found", Tried: tried}
}

func explicit(p, from string) (string, error) {
	st, err := os.Stat(p)
	switch {
	case err != nil:
		return "", &LibraryError{Path: p, Problem: "no such file (given by " + from + ")"}
	case st.IsDir():
		return "", &LibraryError{Path: p, Problem: "is a folder, not a shared library (given by " + from + ")"}
	}
	return p, nil
}

func isFile(p string) bool {
	st, err := os.Stat(p)
	return err == nil && st.Mode().IsRegular()
}

var (
	initOnce sync.Once
	initErr  error
	initPath string
	// loaded is the path of the library Init loaded, once it succeeded:
	// the one record of it (Loaded), safe to read from any goroutine.
	loaded atomic.Pointer[string]
)

// Init loads the library at path and creates the process-wide ONNX Runtime
// environment. Only the first call loads anything; later calls report the
// first call's outcome, or an error if they name another library.
func Init(path string) error {
	initOnce.Do(func() {
		initPath = path
		initErr = load(path)
		if initErr == nil {
			loaded.Store(&path)
		}
	})
	if initErr == nil && path != initPath {
		return fmt.Errorf("infer: ONNX Runtime is already loaded from %s; cannot switch to %s in the same process", initPath, path)
	}
	return initErr
}

// Initialized reports whether Init succeeded.
func Initialized() bool { return loaded.Load() != nil }

// Loaded returns the path of the library Init loaded, or "" before Init
// succeeded.
func Loaded() string {
	if p := loaded.Load(); p != nil {
		return *p
	}
	return ""
}

func load(path string) error {
	// dlopen of a file that is not an ELF shared object fails cleanly, but
	// checking first gives a better message than the loader's.
	if err := checkELF(path); err != nil {
		return err
	}
	ort.SetSharedLibraryPath(path)
	if err := ort.InitializeEnvironment(ort.WithLogLevelError()); err != nil {
		return &LibraryError{Path: path, Problem: "cannot be used as ONNX Runtime " + RuntimeVersion + " or newer: " + err.Error()}
	}
	v := ort.GetVersion()
	if !versionAtLeast(v, 1, 24) {
		_ = ort.DestroyEnvironment()
		return &LibraryError{Path: path, Problem: "is ONNX Runtime " + v + ", need " + RuntimeVersion + " or newer"}
	}
	return nil
}

func checkELF(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return &LibraryError{Path: path, Problem: "cannot be opened: " + err.Error()}
	}
	defer f.Close()
	var magic [4]byte
	if _, err := io.ReadFull(f, magic[:]); err != nil || !bytes.Equal(magic[:], []byte("\x7fELF")) {
		return &LibraryError{Path: path, Problem: "is not a shared library (no ELF header)"}
	}
	return nil
}

// versionAtLeast compares a "major.minor.patch" version string.
func versionAtLeast(v string, major, minor int) bool {
	parts := strings.SplitN(v, ".", 3)
	if len(parts) < 2 {
		return false
	}
	ma, err1 := strconv.Atoi(parts[0])
	mi, err2 := strconv.Atoi(parts[1])
	if err1 != nil || err2 != nil {
		return false
	}
	return ma > major || (ma == major && mi >= minor)
}

// Version is the loaded ONNX Runtime's own version string, or "" before Init.
func Version() string {
	if !Initialized() {
		return ""
	}
	return ort.GetVersion()
}

// runtimeLicense is ONNX Runtime's LICENSE file (the MIT License, as in the
// root of the ONNX Runtime source repository). The npm tarball carries no
// licence file, only the field "license": "MIT" in its package.json, which
// Fetch checks; Fetch writes this text beside the library so that every copy
// of the library (the cache, `make install`, the packaged tarball) has its
// licence next to it.
//
//go:embed onnxruntime-LICENSE.txt
var runtimeLicense []byte

const (
	// LicenseFile is the name of the licence beside the library.
	LicenseFile = "LICENSE"
	// packageJSONEntry holds the npm package's declared licence.
	packageJSONEntry = "package/package.json"
	wantLicense      = "MIT"
)

// Fetch puts the ONNX Runtime library and its licence into the cache folder
// and returns the library's path. When a file with the expected checksum is
// already there it downloads nothing (a missing licence is written from the
// copy built into Fovea). It runs `npm pack` (the npm registry's ordinary
// client; no install scripts run) in a temporary folder, takes the library
// file from the tarball, checks its SHA-256 and the package's declared
// licence, and moves both into place atomically.
func Fetch(ctx context.Context, log io.Writer) (string, error) {
	dst, err := CachePath()
	if err != nil {
		return "", err
	}
	if sum, err := fileSHA256(dst); err == nil && sum == libSHA256 {
		if err := writeLicense(filepath.Dir(dst)); err != nil {
			return "", err
		}
		fmt.Fprintf(log, "ONNX Runtime %s already in %s\n", RuntimeVersion, dst)
		return dst, nil
	}
	npm, err := exec.LookPath("npm")
	if err != nil {
		return "", errors.New("infer: fetching ONNX Runtime needs npm (Debian package npm) on the PATH")
	}
	tmp, err := os.MkdirTemp("", "fovea-ort-")
	if err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	defer os.RemoveAll(tmp)
	fmt.Fprintf(log, "fetching %s from the npm registry (about 86 MB) ...\n", npmPackage)
	cmd := exec.CommandContext(ctx, npm, "pack", npmPackage, "--pack-destination", tmp, "--ignore-scripts", "--silent")
	cmd.Dir = tmp
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	out, err := cmd.Output()
	if err != nil {
		return "", fmt.Errorf("infer: npm pack %s failed: %v: %s", npmPackage, err, strings.TrimSpace(stderr.String()))
	}
	tgz := filepath.Join(tmp, strings.TrimSpace(lastLine(string(out))))
	if !isFile(tgz) {
		tgz = filepath.Join(tmp, "onnxruntime-node-"+RuntimeVersion+".tgz")
	}
	if err := checkDeclaredLicense(tgz); err != nil {
		return "", err
	}
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	// The library replaces dst only once it is complete and its checksum
	// matched (the write fails otherwise and dst stays as it was).
	var sum string
	err = atomicfile.Write(dst, 0o755, func(w io.Writer) error {
		var err error
		if sum, err = extractEntry(tgz, tarballEntry, w); err == nil && sum != libSHA256 {
			err = errChecksum
		}
		return err
	})
	if errors.Is(err, errChecksum) {
		return "", fmt.Errorf("infer: %s from %s has SHA-256 %s, expected %s; refusing to use it", tarballEntry, npmPackage, sum, libSHA256)
	}
	if err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	if err := writeLicense(filepath.Dir(dst)); err != nil {
		return "", err
	}
	fmt.Fprintf(log, "ONNX Runtime %s saved to %s (licence: %s)\n", RuntimeVersion, dst, LicenseFile)
	return dst, nil
}

// Install puts a copy of the library and its licence into dir (created if
// missing), fetching them into the cache first when needed, so that a binary
// in dir or in dir's BundleDir counterpart finds them without the cache.
// `make install` and `make package` use it through `fovea fetch-runtime
// --into DIR`. Each file is replaced atomically; it returns the library's path.
func Install(ctx context.Context, dir string, log io.Writer) (string, error) {
	src, err := Fetch(ctx, log)
	if err != nil {
		return "", err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	lib := filepath.Join(dir, libFile)
	if err := copyAtomic(src, lib, 0o755); err != nil {
		return "", err
	}
	if sum, err := fileSHA256(lib); err != nil || sum != libSHA256 {
		return "", fmt.Errorf("infer: the copy %s does not match the fetched library (SHA-256 %s, %v)", lib, sum, err)
	}
	if err := writeLicense(dir); err != nil {
		return "", err
	}
	fmt.Fprintf(log, "ONNX Runtime %s and its %s copied to %s\n", RuntimeVersion, LicenseFile, dir)
	return lib, nil
}

// checkDeclaredLicense reads the npm package's package.json and refuses a
// package whose declared licence is not the one whose text Fovea ships.
func checkDeclaredLicense(tgz string) error {
	var meta struct {
		License string `json:"license"`
	}
	err := walkEntry(tgz, packageJSONEntry, func(r io.Reader) error {
		return json.NewDecoder(io.LimitReader(r, 1<<20)).Decode(&meta)
	})
	if err != nil {
		return err
	}
	if meta.License != wantLicense {
		return fmt.Errorf("infer: %s declares the licence %q, not %q whose text Fovea ships; refusing to use it", npmPackage, meta.License, wantLicense)
	}
	return nil
}

// writeLicense writes the built-in licence text into dir unless the same
// text is already there.
func writeLicense(dir string) error {
	p := filepath.Join(dir, LicenseFile)
	if old, err := os.ReadFile(p); err == nil && bytes.Equal(old, runtimeLicense) {
		return nil
	}
	return writeAtomic(p, 0o644, func(w io.Writer) error {
		_, err := w.Write(runtimeLicense)
		return err
	})
}

// copyAtomic copies the file src to dst through a temporary file in dst's
// folder, so that dst is either the old file or the complete copy.
func copyAtomic(src, dst string, perm os.FileMode) error {
	in, err := os.Open(src)
	if err != nil {
		return fmt.Errorf("infer: %w", err)
	}
	defer in.Close()
	return writeAtomic(dst, perm, func(w io.Writer) error {
		_, err := io.Copy(w, in)
		return err
	})
}

// writeAtomic is atomicfile.Write with the package's error prefix.
func writeAtomic(path string, perm os.FileMode, write func(io.Writer) error) error {
	if err := atomicfile.Write(path, perm, write); err != nil {
		return fmt.Errorf("infer: %w", err)
	}
	return nil
}

func lastLine(s string) string {
	lines := strings.Split(strings.TrimSpace(s), "\n")
	return lines[len(lines)-1]
}

// walkEntry finds the regular file entry in the .tgz and hands its content
// to read.
func walkEntry(tgz, entry string, read func(io.Reader) error) error {
	f, err := os.Open(tgz)
	if err != nil {
		return fmt.Errorf("infer: %w", err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		return fmt.Errorf("infer: %s: %w", tgz, err)
	}
	tr := tar.NewReader(zr)
	for {
		h, err := tr.Next()
		if err == io.EOF {
			return fmt.Errorf("infer: %s has no %s", filepath.Base(tgz), entry)
		}
		if err != nil {
			return fmt.Errorf("infer: %s: %w", tgz, err)
		}
		if h.Name == entry && h.Typeflag == tar.TypeReg {
			if err := read(tr); err != nil {
				return fmt.Errorf("infer: %s in %s: %w", entry, filepath.Base(tgz), err)
			}
			return nil
		}
	}
}

// errChecksum stops the write of a fetched library whose SHA-256 is not the
// expected one.
var errChecksum = errors.New("checksum mismatch")

// extractEntry copies one regular file out of a .tgz to w and returns its
// SHA-256 (hex).
func extractEntry(tgz, entry string, w io.Writer) (string, error) {
	sum := sha256.New()
	err := walkEntry(tgz, entry, func(r io.Reader) error {
		_, err := io.Copy(io.MultiWriter(w, sum), io.LimitReader(r, 1<<30))
		return err
	})
	if err != nil {
		return "", err
	}
	return hex.EncodeToString(sum.Sum(nil)), nil
}

func fileSHA256(p string) (string, error) {
	f, err := os.Open(p)
	if err != nil {
		return "", err
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", err
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}
