package prep_test

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"

	"fovea/modelio"
	"fovea/modelio/classes"
	"fovea/modelio/infer"
	"fovea/modelio/prep"
	"fovea/modelio/testkit"
)

// The reference files in testdata/torchvision were made once by
// gen_torchvision.py with torchvision 0.14 (Debian python3-torchvision), its
// PIL transforms and PyTorch 1.13; Python does not run in `make test`, these
// tests only read the files (see testdata/torchvision/README.md).
const tvDir = "testdata/torchvision"

// tvImage is gen_torchvision.py's synthetic photo-sized test picture, by the
// same integer formula: gradients, an odd-sized checkerboard, a disk and a
// hash texture. Its SHA-256 is checked against the generator's.
func tvImage(w, h int) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	cx, cy, rad := w*2/5, h*3/5, min(w, h)/4
	for y := range h {
		for x := range w {
			X, Y := int64(x), int64(y)
			r := X * 255 / int64(w-1)
			g := Y * 255 / int64(h-1)
			b := 40 + 160*((X/23+Y/17)%2)
			if (x-cx)*(x-cx)+(y-cy)*(y-cy) < rad*rad {
				r, g = 255-r, (g+128)%256
			}
			t := ((X*73856093)^(Y*19349663))%17 - 8
			clip := func(v int64) uint8 { return uint8(min(max(v, 0), 255)) }
			img.Pix[img.PixOffset(x, y)+0] = clip(r + t)
			img.Pix[img.PixOffset(x, y)+1] = clip(g + t)
			img.Pix[img.PixOffset(x, y)+2] = clip(b + t)
			img.Pix[img.PixOffset(x, y)+3] = 255
		}
	}
	return img
}

func rgbSHA(img *image.NRGBA) string {
	h := sha256.New()
	for i := 0; i < len(img.Pix); i += 4 {
		h.Write(img.Pix[i : i+3])
	}
	return hex.EncodeToString(h.Sum(nil))
}

type tvReference struct {
	Images map[string]string       `json:"images"` // "400x300" -> SHA-256 of the RGB bytes
	Top5   map[string][][2]float64 `json:"top5"`   // "400x300-crop-256" -> [[class, probability]...]
}

func readTVReference(t *testing.T) tvReference {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(tvDir, "reference.json"))
	if err != nil {
		t.Fatal(err)
	}
	var ref tvReference
	if err := json.Unmarshal(b, &ref); err != nil {
		t.Fatalf("reference.json: %v", err)
	}
	return ref
}

// tvSizes and tvModes are the cases gen_torchvision.py writes: several aspect
// ratios, odd sides, a photo-sized one. Each mode is paired with the
// torchvision transforms it must reproduce.
var (
	tvSizes = [][2]int{{400, 300}, {301, 517}, {1024, 683}}
	tvModes = []struct {
		resize, file, torchvision string
		// tol is the largest allowed difference of one 8-bit value: 0 for the
		// crops, which use Pillow's fixed-point arithmetic; 1 for stretch,
		// which uses imaging's floating-point weights (same filter, rounding
		// differs by one level on a few hundred values).
		tol int
	}{
		{prep.ResizeStretch, "stretch", "Resize((224, 224))", 1},
		{prep.ResizeCrop, "crop", "Resize(224) + CenterCrop(224)", 0},
		{"crop:256", "crop-256", "Resize(256) + CenterCrop(224)", 0},
	}
)

func readPNG(t *testing.T, path string) *image.NRGBA {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	out := image.NewNRGBA(img.Bounds())
	for y := img.Bounds().Min.Y; y < img.Bounds().Max.Y; y++ {
		for x := img.Bounds().Min.X; x < img.Bounds().Max.X; x++ {
			out.Set(x, y, img.At(x, y))
		}
	}
	return out
}

// Fit against torchvision's PIL transforms (outside reference: torchvision
// 0.14 Resize/CenterCrop with PIL's antialiased bilinear filter, see
// gen_torchvision.py) on photo-sized pictures: every 8-bit value of the
// 224×224 result within tol of torchvision's. A crop displaced by one pixel,
// a resize to the wrong side or a filter without antialiasing differs by tens
// of levels on the checkerboard's edges and the texture.
func TestFitMatchesTorchvision(t *testing.T) {
	ref := readTVReference(t)
	for _, sz := range tvSizes {
		name := fmt.Sprintf("%dx%d", sz[0], sz[1])
		img := tvImage(sz[0], sz[1])
		if got := rgbSHA(img); got != ref.Images[name] {
			t.Fatalf("%s: the Go test image (sha256 %s) is not the generator's (%s)", name, got, ref.Images[name])
		}
		for _, m := range tvModes {
			c := prep.Default()
			c.Resize = m.resize
			if err := c.Validate(); err != nil {
				t.Fatal(err)
			}
			got := prep.Fit(img, c)
			want := readPNG(t, filepath.Join(tvDir, name+"-"+m.file+".png"))
			if got.Rect != want.Rect {
				t.Fatalf("%s %s: %v, torchvision %v", name, m.resize, got.Rect, want.Rect)
			}
			worst, off := 0, 0
			for i := range got.Pix {
				d := int(got.Pix[i]) - int(want.Pix[i])
				if d < 0 {
					d = -d
				}
				worst = max(worst, d)
				if d > 0 {
					off++
				}
			}
			t.Logf("%s %-8s vs torchvision %s: largest difference %d/255, %d of %d values differ", name, m.resize, m.torchvision, worst, off, len(got.Pix))
			if worst > m.tol {
				t.Errorf("%s %s: largest difference from torchvision's %s is %d/255, allowed %d", name, m.resize, m.torchvision, worst, m.tol)
			}
		}
	}
}

// The whole tensor of the common evaluation pipeline (crop:256, ImageNet
// mean/std) against torchvision's ToTensor + Normalize output of the same
// photo (outside reference: gen_torchvision.py). Tolerance 2e-6: both compute
// (v/255 − mean)/std in float32; the order of the operations may round the
// last bit differently (1 ulp near |x| = 2.6 is 2.4e-7, and one 8-bit step
// is 0.017, far above it).
func TestTensorMatchesTorchvision(t *testing.T) {
	raw, err := os.ReadFile(filepath.Join(tvDir, "400x300-crop-256.f32"))
	if err != nil {
		t.Fatal(err)
	}
	c := prep.Default()
	if err := c.Set("preset", "imagenet"); err != nil {
		t.Fatal(err)
	}
	c.Resize = "crop:256"
	got := make([]float32, c.Len())
	c.TensorFromImage(prep.Fit(tvImage(400, 300), c), got)
	if len(raw) != 4*len(got) {
		t.Fatalf("reference has %d bytes, want %d", len(raw), 4*len(got))
	}
	worst := 0.0
	for i := range got {
		want := math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
		worst = max(worst, math.Abs(float64(got[i]-want)))
	}
	t.Logf("largest difference from torchvision's tensor: %g", worst)
	if worst > 2e-6 {
		t.Errorf("largest difference from torchvision's ToTensor+Normalize is %g, allowed 2e-6", worst)
	}
}

// A model's top-5 probabilities on pictures Fovea prepared agree within 5e-4
// with PyTorch's on pictures torchvision prepared (outside reference:
// gen_torchvision.py, PyTorch 1.13 running the same small CNN, tiny224.onnx,
// that ONNX Runtime runs here). The test also checks that the references of
// the three pipelines differ from each other by more than the tolerance on
// some picture, so that preparing a photo the wrong way would be caught.
func TestTopFiveMatchesTorchvision(t *testing.T) {
	testkit.NeedRuntime(t)
	ref := readTVReference(t)
	m, err := modelio.Open(filepath.Join(tvDir, "tiny224.onnx"))
	if err != nil {
		t.Fatal(err)
	}
	s, err := infer.NewSession(m, infer.Options{Threads: 1})
	if err != nil {
		t.Fatal(err)
	}
	defer s.Close()
	const tol = 5e-4
	separated := 0
	for _, sz := range tvSizes {
		name := fmt.Sprintf("%dx%d", sz[0], sz[1])
		img := tvImage(sz[0], sz[1])
		for i, mode := range tvModes {
			c := prep.Guess(m)
			if err := c.Set("preset", "imagenet"); err != nil {
				t.Fatal(err)
			}
			c.Resize = mode.resize
			x := make([]float32, c.Len())
			c.TensorFromImage(prep.Fit(img, c), x)
			res, err := s.Run(context.Background(), x, 1)
			if err != nil {
				t.Fatal(err)
			}
			p, _ := classes.Probabilities(res.Scores(0))
			want := ref.Top5[name+"-"+mode.file]
			if len(want) != 5 {
				t.Fatalf("%s-%s: reference has %d rows", name, mode.file, len(want))
			}
			for k, w := range want {
				if d := math.Abs(float64(p[int(w[0])]) - w[1]); d > tol {
					t.Errorf("%s %s: class %d probability %.6f, PyTorch on torchvision's tensor %.6f (|Δ| %.2g > %g)", name, mode.resize, int(w[0]), p[int(w[0])], w[1], d, tol)
				} else if k == 0 {
					t.Logf("%s %-8s: top class %d %.6f, PyTorch %.6f", name, mode.resize, int(w[0]), p[int(w[0])], w[1])
				}
			}
			top := classes.TopK(p, nil, 5)
			for k := range top {
				if top[k].Index != int(want[k][0]) && math.Abs(top[k].Probability-want[k][1]) > tol {
					t.Errorf("%s %s: rank %d is class %d, PyTorch's is %d", name, mode.resize, k+1, top[k].Index, int(want[k][0]))
				}
			}
			for _, other := range tvModes[i+1:] {
				o := ref.Top5[name+"-"+other.file]
				if math.Abs(o[0][1]-want[0][1]) > tol || o[0][0] != want[0][0] {
					separated++
				}
			}
		}
	}
	if separated == 0 {
		t.Error("the three pipelines give the same top-5 on every picture: this test could not tell them apart")
	}
}
