package analysis

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"testing"
	"testing/fstest"

	"fovea/modelio/prep"
)

// feedConfig is a small NCHW input with the ImageNet statistics, so that
// every step of the preparation (fit, range, mean, std) changes the values.
func feedConfig() prep.Config {
	c := prep.Default()
	c.Width, c.Height = 12, 10
	return c
}

// feedFiles writes n PNG pictures of various sizes (so that fitting has
// work to do) into dir, with unreadable files at the positions in bad: an
// empty file, a text file, a file that is named but missing. It returns the
// names in order and the PNG bytes by name (nil for the bad ones).
func feedFiles(t *testing.T, dir string, n int, bad map[int]string) ([]string, map[string][]byte) {
	t.Helper()
	names := make([]string, n)
	data := map[string][]byte{}
	for i := range n {
		names[i] = filepath.Join(dir, fmt.Sprintf("p%03d.png", i))
		var content []byte
		switch bad[i] {
		case "empty":
			content = []byte{}
		case "text":
			content = []byte("not a picture\n")
		case "missing":
			continue
		default:
			var buf bytes.Buffer
			if err := png.Encode(&buf, testImage(9+i%7, 8+i%5, uint32(i))); err != nil {
				t.Fatal(err)
			}
			content = buf.Bytes()
			data[names[i]] = content
		}
		if err := os.WriteFile(names[i], content, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return names, data
}

// referenceTensor prepares one file the plain way, one call after another
// on this goroutine: what every worker of a Feed must reproduce bit for bit.
func referenceTensor(t *testing.T, c prep.Config, name string) []float32 {
	t.Helper()
	img, err := prep.Load(name)
	if err != nil {
		t.Fatal(err)
	}
	out := make([]float32, c.Len())
	c.TensorFromImage(prep.Fit(img, c), out)
	return out
}

// drain reads a Feed to its end, releasing every batch after copying it.
func drain(t *testing.T, f *Feed) []Batch {
	t.Helper()
	var out []Batch
	for {
		b, err := f.Next()
		if err == io.EOF {
			return out
		}
		if err != nil {
			t.Fatal(err)
		}
		cp := *b
		cp.Data = slices.Clone(b.Data[:b.N*feedConfig().Len()])
		out = append(out, cp)
		f.Release(b)
	}
}

func sameBits(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return false
		}
	}
	return true
}

// TestFeedOrder: whatever the number of workers and the batch size, batch
// k holds files [kB, (k+1)B) minus the unreadable ones, in file order, each
// prepared exactly as a plain sequential prep.Load + Fit + TensorFromImage
// does, and the unreadable ones are listed with their error class.
func TestFeedOrder(t *testing.T) {
	c := feedConfig()
	bad := map[int]string{0: "empty", 5: "text", 6: "missing", 17: "text"}
	names, _ := feedFiles(t, t.TempDir(), 23, bad)
	want := map[string][]float32{}
	for i, n := range names {
		if bad[i] == "" {
			want[n] = referenceTensor(t, c, n)
		}
	}
	for _, workers := range []int{1, 2, 3, 8} {
		for _, bs := range []int{1, 3, 4, 16, 40} {
			t.Run(fmt.Sprintf("workers%d/batch%d", workers, bs), func(t *testing.T) {
				f := NewFeed(context.Background(), names, c, FeedOptions{Batch: bs, Workers: workers, SkipUnreadable: true})
				defer f.Close()
				batches := drain(t, f)
				if wantN := (len(names) + bs - 1) / bs; len(batches) != wantN {
					t.Fatalf("%d batches, want %d", len(batches), wantN)
				}
				for k, b := range batches {
					lo, hi := k*bs, min((k+1)*bs, len(names))
					var files, skipped []string
					for i := lo; i < hi; i++ {
						if bad[i] == "" {
							files = append(files, names[i])
						} else {
							skipped = append(skipped, names[i])
						}
					}
					if b.N != len(files) || !slices.Equal(b.Files, files) {
						t.Fatalf("batch %d: %d images %v, want %v", k, b.N, b.Files, files)
					}
					if b.Done != hi {
						t.Errorf("batch %d: done %d, want %d", k, b.Done, hi)
					}
					var gotSkipped []string
					for _, s := range b.Skipped {
						gotSkipped = append(gotSkipped, s.File)
						i := slices.Index(names, s.File)
						var wantErr error = prep.ErrFormat
						switch bad[i] {
						case "empty":
							wantErr = prep.ErrEmpty
						case "missing":
							wantErr = os.ErrNotExist
						}
						if !errors.Is(s.Err, wantErr) {
							t.Errorf("%s (%s): error %v, want %v", s.File, bad[i], s.Err, wantErr)
						}
					}
					if !slices.Equal(gotSkipped, skipped) {
						t.Errorf("batch %d: skipped %v, want %v", k, gotSkipped, skipped)
					}
					for j, n := range b.Files {
						if !sameBits(b.Data[j*c.Len():(j+1)*c.Len()], want[n]) {
							t.Errorf("batch %d image %d (%s): values differ from the sequential preparation", k, j, n)
						}
					}
				}
			})
		}
	}
}

// TestFeedFirstError: without SkipUnreadable, Next returns the error of
// the first unreadable file in file order, naming it, whatever the number
// of workers (a later bad file decoded sooner by another worker must not
// win).
func TestFeedFirstError(t *testing.T) {
	c := feedConfig()
	names, _ := feedFiles(t, t.TempDir(), 20, map[int]string{9: "text", 10: "empty", 11: "text"})
	for _, workers := range []int{1, 2, 3, 8} {
		f := NewFeed(context.Background(), names, c, FeedOptions{Batch: 4, Workers: workers})
		var err error
		images := 0
		for err == nil {
			var b *Batch
			if b, err = f.Next(); err == nil {
				images += b.N
				f.Release(b)
			}
		}
		f.Close()
		var fe *prep.FileError
		if !errors.As(err, &fe) || fe.File != names[9] || !errors.Is(err, prep.ErrFormat) {
			t.Errorf("%d workers: error %v, want the format error of %s", workers, err, names[9])
		}
		if images != 8 {
			t.Errorf("%d workers: %d images before the error, want the 8 of the first two batches", workers, images)
		}
	}
}

// TestFeedFS: names opened in an fs.FS give the same values as the same
// bytes read from the disk.
func TestFeedFS(t *testing.T) {
	c := feedConfig()
	names, data := feedFiles(t, t.TempDir(), 7, map[int]string{3: "missing"})
	fsys := fstest.MapFS{}
	var rel []string
	for i, n := range names {
		r := fmt.Sprintf("probe/%d.png", i)
		rel = append(rel, r)
		if data[n] != nil {
			fsys[r] = &fstest.MapFile{Data: data[n]}
		}
	}
	fsys["probe/dir"] = &fstest.MapFile{Mode: os.ModeDir}
	rel = append(rel, "probe/dir")
	f := NewFeed(context.Background(), rel, c, FeedOptions{FS: fsys, Batch: 3, Workers: 2, SkipUnreadable: true})
	defer f.Close()
	var got []string
	var skipped []Skipped
	for _, b := range drain(t, f) {
		for j, r := range b.Files {
			got = append(got, r)
			i := slices.Index(rel, r)
			if !sameBits(b.Data[j*c.Len():(j+1)*c.Len()], referenceTensor(t, c, names[i])) {
				t.Errorf("%s: values differ from the file on disk", r)
			}
		}
		skipped = append(skipped, b.Skipped...)
	}
	if want := []string{"probe/0.png", "probe/1.png", "probe/2.png", "probe/4.png", "probe/5.png", "probe/6.png"}; !slices.Equal(got, want) {
		t.Errorf("images %v, want %v", got, want)
	}
	if len(skipped) != 2 || skipped[0].File != "probe/3.png" || !errors.Is(skipped[0].Err, os.ErrNotExist) ||
		skipped[1].File != "probe/dir" || !errors.Is(skipped[1].Err, prep.ErrFormat) {
		t.Errorf("skipped %v, want probe/3.png (missing) and probe/dir (a folder)", skipped)
	}
}

// TestFeedBounded: however many files, no more than InFlight buffers are
// made when every batch is released.
func TestFeedBounded(t *testing.T) {
	c := feedConfig()
	names, _ := feedFiles(t, t.TempDir(), 40, nil)
	f := NewFeed(context.Background(), names, c, FeedOptions{Batch: 2, Workers: 4, InFlight: 3})
	defer f.Close()
	seen := map[*float32]bool{}
	for {
		b, err := f.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		seen[&b.Data[0]] = true
		f.Release(b)
	}
	if len(seen) > 3 {
		t.Errorf("%d batch buffers for 20 batches, want at most InFlight = 3", len(seen))
	}
}

// TestFeedCancel: a cancelled context ends Next with its error, and Close
// leaves no goroutine behind, also when batches were never released.
func TestFeedCancel(t *testing.T) {
	c := feedConfig()
	names, _ := feedFiles(t, t.TempDir(), 30, nil)
	before := runtime.NumGoroutine()
	ctx, cancel := context.WithCancel(context.Background())
	f := NewFeed(ctx, names, c, FeedOptions{Batch: 2, Workers: 3})
	if _, err := f.Next(); err != nil {
		t.Fatal(err)
	}
	cancel()
	var err error
	for range 20 { // batches already filled may still come out
		if _, err = f.Next(); err != nil {
			break
		}
	}
	if !errors.Is(err, context.Canceled) {
		t.Errorf("after cancel: %v, want context.Canceled", err)
	}
	f.Close()
	f.Close()
	waitGoroutines(t, before)

	// Closed without reading anything.
	f = NewFeed(context.Background(), names, c, FeedOptions{Batch: 2, Workers: 3})
	f.Close()
	waitGoroutines(t, before)
}
