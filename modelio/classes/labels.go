package classes

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"unicode/utf8"

	"fovea/modelio"
)

// maxLabelsFile bounds a labels file: a million classes of 16 bytes.
const maxLabelsFile = 16 << 20

// Where the labels came from (the source returned by Labels).
const (
	LabelsUser     = "user"     // the file the user chose
	LabelsMetadata = "metadata" // the model's metadata
	LabelsBeside   = "beside"   // a labels file next to the model
	LabelsNone     = ""         // none: classes are called by index
)

// besideNames are the labels files looked for in the model's folder, in
// order; "<stem>" is the model's file name without its extension.
var besideNames = []string{"<name>.labels.txt", "<stem>.labels.txt", "<stem>.txt", "labels.txt", "classes.txt"}

// Labels finds the class names for m and says where they came from:
//
//  1. userFile, when not empty: a choice the user made beats any guess, and
//     an unreadable choice is an error, not a silent fallback;
//  2. the model's metadata (m.Labels);
//  3. a labels file in the model's folder: <model file>.labels.txt,
//     <stem>.labels.txt, <stem>.txt, labels.txt, classes.txt, first found;
//  4. none (LabelsNone): TopK then calls the classes by index.
//
// path is the file the labels were read from ("" for metadata and none).
// A file beside the model that exists but cannot be read is skipped.
func Labels(m *modelio.Model, userFile string) (labels []string, source, path string, err error) {
	if userFile != "" {
		l, err := ReadLabels(userFile)
		if err != nil {
			return nil, LabelsNone, "", err
		}
		return l, LabelsUser, userFile, nil
	}
	if len(m.Labels) > 0 {
		return m.Labels, LabelsMetadata, "", nil
	}
	dir := m.Dir()
	if dir == "" && m.Path != "" {
		dir = filepath.Dir(m.Path)
	}
	if dir == "" {
		return nil, LabelsNone, "", nil
	}
	stem := strings.TrimSuffix(m.Name, filepath.Ext(m.Name))
	for _, pat := range besideNames {
		name := strings.NewReplacer("<name>", m.Name, "<stem>", stem).Replace(pat)
		if name == m.Name {
			continue
		}
		p := filepath.Join(dir, name)
		if st, err := os.Stat(p); err != nil || !st.Mode().IsRegular() {
			continue
		}
		if l, err := ReadLabels(p); err == nil && len(l) > 0 {
			return l, LabelsBeside, p, nil
		}
	}
	return nil, LabelsNone, "", nil
}

// ReadLabels reads a labels file: UTF-8 text with one label a line (CRLF
// and a byte-order mark are fine; spaces around a label and trailing empty
// lines are dropped), or a JSON array of strings. When every line starts
// with its own index ("0 cat", "1: dog", "2, bird"), the indices are
// removed.
func ReadLabels(path string) ([]string, error) {
	name := filepath.Base(path)
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("labels file %s: %w", name, unwrapPathErr(err))
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, maxLabelsFile+1))
	if err != nil {
		return nil, fmt.Errorf("labels file %s: %w", name, unwrapPathErr(err))
	}
	if len(b) > maxLabelsFile {
		return nil, fmt.Errorf("labels file %s: more than %d MiB; not a labels file", name, maxLabelsFile>>20)
	}
	l, err := parseLabelText(b)
	if err != nil {
		return nil, fmt.Errorf("labels file %s: %v", name, err)
	}
	return l, nil
}

func parseLabelText(b []byte) ([]string, error) {
	b = bytes.TrimPrefix(b, []byte("\xef\xbb\xbf"))
	if !utf8.Valid(b) {
		return nil, fmt.Errorf("not UTF-8 text; not a labels file")
	}
	if bytes.IndexByte(b, 0) >= 0 {
		return nil, fmt.Errorf("contains NUL bytes; not a labels file")
	}
	t := bytes.TrimSpace(b)
	if len(t) == 0 {
		return nil, fmt.Errorf("empty")
	}
	if t[0] == '[' {
		var arr []string
		if err := json.Unmarshal(t, &arr); err != nil {
			return nil, fmt.Errorf("starts like a JSON array but is not one of strings: %v", err)
		}
		return arr, nil
	}
	lines := strings.Split(strings.ReplaceAll(string(b), "\r\n", "\n"), "\n")
	for i := range lines {
		lines[i] = strings.TrimSpace(lines[i])
	}
	for len(lines) > 0 && lines[len(lines)-1] == "" {
		lines = lines[:len(lines)-1]
	}
	return stripIndices(lines), nil
}

// stripIndices removes "<i><sep>" from line i when every line has it.
func stripIndices(lines []string) []string {
	out := make([]string, len(lines))
	for i, l := range lines {
		rest, ok := strings.CutPrefix(l, strconv.Itoa(i))
		if !ok {
			return lines
		}
		trimmed := strings.TrimLeft(rest, " \t:,;=")
		if trimmed == rest || trimmed == "" {
			return lines // "10" on line 1 is a label "10", not an index
		}
		out[i] = trimmed
	}
	return out
}

func unwrapPathErr(err error) error {
	if pe, ok := err.(*os.PathError); ok {
		return pe.Err
	}
	return err
}
