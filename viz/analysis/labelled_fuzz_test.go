package analysis

import (
	"testing"
	"testing/fstest"
)

// FuzzReadList: any bytes as a list file give entries or an error naming
// the list, never a panic; every entry is a sample with a class the
// resolver allows or carries its problem.
func FuzzReadList(f *testing.F) {
	for _, seed := range []string{
		"file,label,index\nwasher-0000.png,washer,0\n",
		"a.png\tcat\nb.png\t1\n",
		"a.png,\"unterminated\n",
		"# comment\n\n,\n,,\na.png\n",
		"\ufeffpath,label\nx/y.png,DOG\n",
	} {
		f.Add([]byte(seed))
	}
	r := ClassResolver{Labels: []string{"cat", "dog"}, Classes: 2}
	f.Fuzz(func(t *testing.T, data []byte) {
		l, err := ReadList(data, "list.csv", r, fstest.MapFS{}, ".")
		if err != nil {
			return
		}
		for i, s := range l.Samples {
			if s.Problem == "" && (s.Class < 0 || s.Class >= 2) {
				t.Fatalf("entry %d %+v: class outside the model's", i, s)
			}
			if s.Problem != "" && s.Class != -1 {
				t.Fatalf("entry %d %+v: a problem with a class", i, s)
			}
			if i > 0 && l.Samples[i-1].File > s.File {
				t.Fatalf("entries not sorted at %d", i)
			}
		}
	})
}
