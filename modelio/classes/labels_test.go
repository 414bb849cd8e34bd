package classes

import (
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"fovea/modelio"
	"fovea/modelio/onnxbuild"
)

func TestReadLabelsFormats(t *testing.T) {
	cases := []struct {
		name, text string
		want       []string
	}{
		{"plain", "bolt\nnut\nwasher\n", []string{"bolt", "nut", "washer"}},
		{"CRLF, BOM, spaces, trailing blank lines", "\ufeffbolt \r\n nut\r\nwasher\r\n\r\n\n", []string{"bolt", "nut", "washer"}},
		{"inner empty line kept", "bolt\n\nwasher", []string{"bolt", "", "washer"}},
		{"indexed", "0 bolt\n1: nut\n2,washer\n", []string{"bolt", "nut", "washer"}},
		{"numbers are labels", "10\n20\n", []string{"10", "20"}},
		{"index on some lines only", "0 bolt\nnut\n", []string{"0 bolt", "nut"}},
		{"JSON", `["bolt", "nut, M4", "washer"]`, []string{"bolt", "nut, M4", "washer"}},
	}
	dir := t.TempDir()
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := filepath.Join(dir, "l.txt")
			if err := os.WriteFile(p, []byte(c.text), 0o644); err != nil {
				t.Fatal(err)
			}
			got, err := ReadLabels(p)
			if err != nil || !slices.Equal(got, c.want) {
				t.Errorf("%s: got %q, %v; want %q", c.name, got, err, c.want)
			}
		})
	}
	for _, c := range []struct {
		name string
		data []byte
		want string
	}{
		{"binary", []byte{0x89, 'P', 'N', 'G', 0, 0, 0xff, 0xfe}, "labels file bad.txt: not UTF-8"},
		{"empty", nil, "labels file bad.txt: empty"},
		{"bad JSON", []byte(`[1, 2]`), "labels file bad.txt: starts like a JSON array"},
		{"too large", []byte(strings.Repeat("x\n", maxLabelsFile/2+1)), "labels file bad.txt: more than 16 MiB"},
	} {
		t.Run(c.name, func(t *testing.T) {
			p := filepath.Join(dir, "bad.txt")
			if err := os.WriteFile(p, c.data, 0o644); err != nil {
				t.Fatal(err)
			}
			if _, err := ReadLabels(p); err == nil || !strings.HasPrefix(err.Error(), c.want) {
				t.Errorf("%s: got %v, want %q", c.name, err, c.want)
			}
		})
	}
	if _, err := ReadLabels(filepath.Join(dir, "missing.txt")); err == nil || !strings.HasPrefix(err.Error(), "labels file missing.txt: ") {
		t.Errorf("missing file: %v", err)
	}
}

// The order of the sources: the user's file, the model's metadata, a file
// beside the model, none.
func TestLabelsSources(t *testing.T) {
	withMeta := fiveClassModel(t, "meta.onnx", "bolt\nnut\nwasher\nscrew\nrivet")
	plain := fiveClassModel(t, "parts.onnx", "")
	user := filepath.Join(t.TempDir(), "mine.txt")
	if err := os.WriteFile(user, []byte("a\nb\nc\nd\ne\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	check := func(name string, m *modelio.Model, userFile string, want []string, wantSrc, wantPath string) {
		t.Helper()
		l, src, p, err := Labels(m, userFile)
		if err != nil || !slices.Equal(l, want) || src != wantSrc || p != wantPath {
			t.Errorf("%s: got %q from %q (%q), %v; want %q from %q (%q)", name, l, src, p, err, want, wantSrc, wantPath)
		}
	}
	check("user file beats metadata", withMeta, user, []string{"a", "b", "c", "d", "e"}, LabelsUser, user)
	check("metadata", withMeta, "", []string{"bolt", "nut", "washer", "screw", "rivet"}, LabelsMetadata, "")
	check("nothing", plain, "", nil, LabelsNone, "")

	beside := filepath.Join(plain.Dir(), "parts.labels.txt")
	if err := os.WriteFile(beside, []byte("x\ny\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	check("beside: <stem>.labels.txt", plain, "", []string{"x", "y"}, LabelsBeside, beside)
	os.Remove(beside)
	generic := filepath.Join(plain.Dir(), "labels.txt")
	if err := os.WriteFile(generic, []byte("p\nq\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	check("beside: labels.txt", plain, "", []string{"p", "q"}, LabelsBeside, generic)

	if _, _, _, err := Labels(plain, filepath.Join(t.TempDir(), "gone.txt")); err == nil {
		t.Error("a missing user-chosen file must be an error, not a silent fallback")
	}
}

// fiveClassModel writes a small five-class classifier into a fresh folder,
// with labels as its "labels" metadata entry when not empty, and opens it.
func fiveClassModel(t *testing.T, name, labels string) *modelio.Model {
	t.Helper()
	b := onnxbuild.New(13, onnxbuild.Random)
	x := b.Input("image", 1, "N", 3, 8, 8)
	x = b.GlobalAveragePool(b.Relu(b.Conv(x, 3, 4, 3, 1, 1)))
	b.Output(b.Gemm(b.Flatten(x), 4, 5), "N", 5)
	if labels != "" {
		b.Meta("labels", labels)
	}
	p := filepath.Join(t.TempDir(), name)
	if err := b.Write(p); err != nil {
		t.Fatal(err)
	}
	m, err := modelio.Open(p)
	if err != nil {
		t.Fatalf("modelio.Open(%s): %v", name, err)
	}
	return m
}
