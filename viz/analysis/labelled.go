package analysis

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"image"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"fovea/modelio/prep"
)

// Sample is one entry of a labelled data set: an image file and its true
// class, or an entry that cannot be evaluated and says why.
type Sample struct {
	// File is the path as the data gives it: relative to the labelled folder
	// (forward slashes), or as written in the list file.
	File string
	// Class is the true class index; -1 when Problem is set.
	Class int
	// Problem says why the entry is not evaluated (an unknown label, a
	// class folder without images, a malformed list line); "" for a sample.
	Problem string
}

// Labelled is a labelled data set: its entries sorted by File (ties keep
// the order they were read in), so that every reader of the same data sees
// the same order and a shard (Labelled.Shard) is the same slice everywhere.
type Labelled struct {
	Source  string   // the folder or list file as given, for messages
	Samples []Sample // sorted by File
	// fsys holds the images; nil means the operating system's files.
	fsys fs.FS
	// name is the name a sample's File is opened under: in fsys, or a path
	// of the operating system when fsys is nil.
	name func(file string) string
}

// Path returns the file system path of a sample's File, or "" when the
// data is not on disk (an embedded or in-memory fs.FS).
func (l *Labelled) Path(file string) string {
	if l.fsys != nil {
		return ""
	}
	return l.name(file)
}

// Images counts the entries that are samples (no Problem).
func (l *Labelled) Images() int {
	n := 0
	for _, s := range l.Samples {
		if s.Problem == "" {
			n++
		}
	}
	return n
}

// Load decodes a sample's image with prep's limits and EXIF orientation,
// exactly as prep.Load does for a file on disk.
func (l *Labelled) Load(file string) (image.Image, error) {
	if l.fsys == nil {
		return prep.Load(l.name(file))
	}
	f, err := l.fsys.Open(l.name(file))
	if err != nil {
		return nil, fmt.Errorf("prep: %w", err)
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, fmt.Errorf("prep: %w", err)
	}
	if st.IsDir() {
		return nil, &prep.FileError{File: file, Class: prep.ErrFormat, Detail: "is a folder"}
	}
	if ra, ok := f.(io.ReaderAt); ok {
		return prep.DecodeLimit(ra, st.Size(), file, 0)
	}
	data, err := io.ReadAll(io.LimitReader(f, st.Size()+1))
	if err != nil {
		return nil, fmt.Errorf("prep: %s: %w", file, err)
	}
	return prep.Decode(data, file)
}

// Shard returns the k-th (0-based) of n contiguous slices of the sorted
// entries: entries [len·k/n, len·(k+1)/n). The n shards cover every entry
// exactly once, whatever machine computes them.
func (l *Labelled) Shard(k, n int) (*Labelled, error) {
	if n < 1 || k < 0 || k >= n {
		return nil, fmt.Errorf("viz: shard %d of %d: want 0 ≤ k < n", k, n)
	}
	total := len(l.Samples)
	lo, hi := total*k/n, total*(k+1)/n
	out := *l
	out.Samples = l.Samples[lo:hi:hi]
	return &out, nil
}

// ClassResolver turns a class folder's name or a list's label into a class
// index: an exact label, then a label compared case-insensitively (when only
// one matches), then a class number below Classes.
type ClassResolver struct {
	Labels  []string // the model's class names, may be nil
	Classes int      // number of classes; 0 = unknown (any number ≥ 0 is taken)
}

// Resolve returns the class index of name, or an error saying why none fits.
func (r ClassResolver) Resolve(name string) (int, error) {
	s := strings.TrimSpace(name)
	if i := slices.Index(r.Labels, s); i >= 0 {
		return i, nil
	}
	var folded []int
	for i, l := range r.Labels {
		if strings.EqualFold(l, s) {
			folded = append(folded, i)
		}
	}
	if len(folded) == 1 {
		return folded[0], nil
	}
	if len(folded) > 1 {
		return -1, fmt.Errorf("label %q matches %d class names when case is ignored", s, len(folded))
	}
	if i, err := strconv.Atoi(s); err == nil {
		if i < 0 || (r.Classes > 0 && i >= r.Classes) {
			return -1, fmt.Errorf("class %d is outside 0…%d", i, r.Classes-1)
		}
		return i, nil
	}
	if len(r.Labels) == 0 {
		return -1, fmt.Errorf("unknown label %q (the model has no class names: name folders by class number)", s)
	}
	return -1, fmt.Errorf("unknown label %q", s)
}

// isImageName reports whether a file name has one of the image extensions
// ProbeFiles takes and is not hidden.
func isImageName(name string) bool {
	return !strings.HasPrefix(name, ".") && slices.Contains(prep.Extensions, strings.ToLower(path.Ext(name)))
}

// ReadFolder lists a labelled folder: each sub-folder of root in fsys is a
// class, named by a class label (case-insensitive) or a class number; the
// images under it (at any depth) are its samples. A sub-folder that names no
// class makes each of its images an entry with a Problem; a class folder
// without images is an entry "name/" with a Problem; an image directly in
// root (in no class folder) too. Hidden files and folders and files without
// an image extension are passed over.
func ReadFolder(fsys fs.FS, root string, r ClassResolver) (*Labelled, error) {
	ents, err := fs.ReadDir(fsys, root)
	if err != nil {
		return nil, fmt.Errorf("viz: labelled folder: %w", err)
	}
	l := &Labelled{Source: root, fsys: fsys, name: func(file string) string { return path.Join(root, file) }}
	for _, e := range ents {
		name := e.Name()
		if strings.HasPrefix(name, ".") {
			continue
		}
		if !e.IsDir() {
			if isImageName(name) {
				l.Samples = append(l.Samples, Sample{File: name, Class: -1, Problem: "not inside a class folder"})
			}
			continue
		}
		class, cerr := r.Resolve(name)
		var files []string
		err := fs.WalkDir(fsys, path.Join(root, name), func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if strings.HasPrefix(d.Name(), ".") && p != path.Join(root, name) {
				if d.IsDir() {
					return fs.SkipDir
				}
				return nil
			}
			if !d.IsDir() && isImageName(d.Name()) {
				rel := strings.TrimPrefix(strings.TrimPrefix(p, root), "/")
				if root == "." {
					rel = p
				}
				files = append(files, rel)
			}
			return nil
		})
		if err != nil {
			return nil, fmt.Errorf("viz: labelled folder: %w", err)
		}
		switch {
		case cerr != nil:
			for _, f := range files {
				l.Samples = append(l.Samples, Sample{File: f, Class: -1, Problem: "folder " + name + ": " + cerr.Error()})
			}
			if len(files) == 0 {
				l.Samples = append(l.Samples, Sample{File: name + "/", Class: -1, Problem: "folder names no class (" + cerr.Error() + ") and holds no images"})
			}
		case len(files) == 0:
			l.Samples = append(l.Samples, Sample{File: name + "/", Class: -1, Problem: "class folder without images"})
		default:
			for _, f := range files {
				l.Samples = append(l.Samples, Sample{File: f, Class: class})
			}
		}
	}
	sortSamples(l.Samples)
	if len(l.Samples) == 0 {
		return nil, fmt.Errorf("viz: labelled folder %s: no class folders with images (png, jpg, gif, bmp, tiff, webp)", root)
	}
	return l, nil
}

// OpenFolder is ReadFolder on a folder of the file system.
func OpenFolder(dir string, r ClassResolver) (*Labelled, error) {
	st, err := os.Stat(dir)
	if err != nil {
		return nil, fmt.Errorf("viz: labelled folder: %w", err)
	}
	if !st.IsDir() {
		return nil, fmt.Errorf("viz: labelled folder %s: is not a folder", dir)
	}
	l, err := ReadFolder(os.DirFS(dir), ".", r)
	if err != nil {
		return nil, err
	}
	// Opened as paths: the same as classify's prep.Load of the file.
	l.Source, l.fsys = dir, nil
	l.name = func(file string) string { return filepath.Join(dir, filepath.FromSlash(file)) }
	return l, nil
}

// MaxListBytes bounds a list file's size (about a million lines of 256 bytes).
const MaxListBytes = 256 << 20

// ReadList reads a list file of "path,label" lines (CSV, or TSV when the
// first line holds a tab): path relative to the list's folder, or absolute
// when open allows it; label a class label or number (ClassResolver). A
// first line whose first field is "file", "path", "image" or "filename" is a
// header; fields after the second are ignored; lines starting with # are
// comments. A line with one field, an empty path or an unknown label becomes
// an entry with a Problem named "list:LINE" or by its path.
//
// Paths are opened in fsys relative to dir (fsys nil: the operating
// system's files, relative to dir unless absolute); OpenList and ReadListFS
// give both.
func ReadList(data []byte, name string, r ClassResolver, fsys fs.FS, dir string) (*Labelled, error) {
	comma := ','
	first, _, _ := bytes.Cut(data, []byte("\n"))
	if bytes.ContainsRune(first, '\t') {
		comma = '\t'
	}
	cr := csv.NewReader(bytes.NewReader(data))
	cr.Comma = comma
	cr.Comment = '#'
	cr.FieldsPerRecord = -1
	cr.ReuseRecord = true
	l := &Labelled{Source: name, fsys: fsys, name: func(p string) string { return path.Join(dir, p) }}
	if fsys == nil {
		l.name = func(p string) string {
			if filepath.IsAbs(p) {
				return p
			}
			return filepath.Join(dir, filepath.FromSlash(p))
		}
	}
	for rowNo := 0; ; rowNo++ {
		rec, err := cr.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			var pe *csv.ParseError
			if errors.As(err, &pe) {
				return nil, fmt.Errorf("viz: list %s: line %d: %v", name, pe.Line, pe.Err)
			}
			return nil, fmt.Errorf("viz: list %s: %v", name, err)
		}
		line, _ := cr.FieldPos(0)
		where := name + ":" + strconv.Itoa(line)
		if rowNo == 0 && len(rec) > 0 {
			switch strings.ToLower(strings.TrimSpace(strings.TrimPrefix(rec[0], "\ufeff"))) {
			case "file", "path", "image", "filename":
				continue
			}
		}
		if len(rec) < 2 {
			l.Samples = append(l.Samples, Sample{File: where, Class: -1, Problem: "line has no label (want path,label)"})
			continue
		}
		file := strings.TrimSpace(rec[0])
		if file == "" {
			l.Samples = append(l.Samples, Sample{File: where, Class: -1, Problem: "empty path"})
			continue
		}
		class, err := r.Resolve(rec[1])
		if err != nil {
			l.Samples = append(l.Samples, Sample{File: file, Class: -1, Problem: err.Error()})
			continue
		}
		l.Samples = append(l.Samples, Sample{File: file, Class: class})
	}
	sortSamples(l.Samples)
	if len(l.Samples) == 0 {
		return nil, fmt.Errorf("viz: list %s: no entries", name)
	}
	return l, nil
}

// OpenList reads a list file on disk (ReadList); relative paths in it are
// taken from the list's folder, absolute ones as they are.
func OpenList(file string, r ClassResolver) (*Labelled, error) {
	st, err := os.Stat(file)
	if err != nil {
		return nil, fmt.Errorf("viz: list: %w", err)
	}
	if st.Size() > MaxListBytes {
		return nil, fmt.Errorf("viz: list %s: %d bytes, more than the limit of %d", file, st.Size(), MaxListBytes)
	}
	data, err := os.ReadFile(file)
	if err != nil {
		return nil, fmt.Errorf("viz: list: %w", err)
	}
	return ReadList(data, file, r, nil, filepath.Dir(file))
}

// sortSamples orders entries by File; equal names keep their read order.
func sortSamples(s []Sample) {
	slices.SortStableFunc(s, func(a, b Sample) int { return strings.Compare(a.File, b.File) })
}

// ReadListFS reads the list file name in fsys (ReadList); paths in it are
// relative to the list's folder within fsys.
func ReadListFS(fsys fs.FS, name string, r ClassResolver) (*Labelled, error) {
	data, err := fs.ReadFile(fsys, name)
	if err != nil {
		return nil, fmt.Errorf("viz: list: %w", err)
	}
	return ReadList(data, name, r, fsys, path.Dir(name))
}
