package infer

import (
	"archive/tar"
	"bytes"
	"compress/gzip"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"

	ort "github.com/yalue/onnxruntime_go"
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

// FindLibrary returns the library to load, searching in order: the flag value
// (when not empty), $FOVEA_ORT_LIB, the cache folder, LD_LIBRARY_PATH and the
// system library folders. A path given explicitly (flag or environment) that
// does not exist is an error: falling back silently would hide a typo.
func FindLibrary(flag string) (string, error) {
	if flag != "" {
		return explicit(flag, "--ort-lib")
	}
	if env := os.Getenv(EnvLibrary); env != "" {
		return explicit(env, "$"+EnvLibrary)
	}
	var tried []string
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
)

// Init loads the library at path and creates the process-wide ONNX Runtime
// environment. Only the first call loads anything; later calls report the
// first call's outcome, or an error if they name another library.
func Init(path string) error {
	initOnce.Do(func() {
		initPath = path
		initErr = load(path)
	})
	if initErr == nil && path != initPath {
		return fmt.Errorf("infer: ONNX Runtime is already loaded from %s; cannot switch to %s in the same process", initPath, path)
	}
	return initErr
}

// Initialized reports whether Init succeeded.
func Initialized() bool { return initPath != "" && initErr == nil }

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

// Fetch puts the ONNX Runtime library into the cache folder and returns its
// path. When a file with the expected checksum is already there it downloads
// nothing. It runs `npm pack` (the npm registry's ordinary client; no install
// scripts run) in a temporary folder, takes the one library file from the
// tarball, checks its SHA-256 and moves it into place atomically.
func Fetch(ctx context.Context, log io.Writer) (string, error) {
	dst, err := CachePath()
	if err != nil {
		return "", err
	}
	if sum, err := fileSHA256(dst); err == nil && sum == libSHA256 {
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
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	part, err := extractEntry(tgz, tarballEntry, filepath.Dir(dst))
	if err != nil {
		return "", err
	}
	defer os.Remove(part)
	sum, err := fileSHA256(part)
	if err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	if sum != libSHA256 {
		return "", fmt.Errorf("infer: %s from %s has SHA-256 %s, expected %s; refusing to use it", tarballEntry, npmPackage, sum, libSHA256)
	}
	if err := os.Rename(part, dst); err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	fmt.Fprintf(log, "ONNX Runtime %s saved to %s\n", RuntimeVersion, dst)
	return dst, nil
}

func lastLine(s string) string {
	lines := strings.Split(strings.TrimSpace(s), "\n")
	return lines[len(lines)-1]
}

// extractEntry copies one regular file out of a .tgz into a temporary file in
// dir and returns that file's path.
func extractEntry(tgz, entry, dir string) (string, error) {
	f, err := os.Open(tgz)
	if err != nil {
		return "", fmt.Errorf("infer: %w", err)
	}
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		return "", fmt.Errorf("infer: %s: %w", tgz, err)
	}
	tr := tar.NewReader(zr)
	for {
		h, err := tr.Next()
		if err == io.EOF {
			return "", fmt.Errorf("infer: %s has no %s", filepath.Base(tgz), entry)
		}
		if err != nil {
			return "", fmt.Errorf("infer: %s: %w", tgz, err)
		}
		if h.Name != entry || h.Typeflag != tar.TypeReg {
			continue
		}
		out, err := os.CreateTemp(dir, ".fetch-*")
		if err != nil {
			return "", fmt.Errorf("infer: %w", err)
		}
		_, cerr := io.Copy(out, io.LimitReader(tr, 1<<30))
		serr := out.Sync()
		xerr := out.Close()
		if err := errors.Join(cerr, serr, xerr); err != nil {
			os.Remove(out.Name())
			return "", fmt.Errorf("infer: writing %s: %w", out.Name(), err)
		}
		if err := os.Chmod(out.Name(), 0o755); err != nil {
			os.Remove(out.Name())
			return "", fmt.Errorf("infer: %w", err)
		}
		return out.Name(), nil
	}
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
