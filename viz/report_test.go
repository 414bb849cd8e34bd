package viz

import (
	"bytes"
	"image"
	"image/color"
	"slices"
	"strings"
	"testing"

	"fovea/modelio/classes"
)

func solid(w, h int, c color.NRGBA) *image.NRGBA {
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	fill(img, img.Rect, c)
	return img
}

func TestComposeLayout(t *testing.T) {
	// Two pictures 10×20 and 30×10 in one row, gap 12, no captions:
	// width 12 + 10 + 12 + 30 + 12 = 76, height 12 + 20 + 12 = 44; each
	// picture centred in its cell (the second 5 pixels down).
	red, blue := color.NRGBA{255, 0, 0, 255}, color.NRGBA{0, 0, 255, 255}
	sheet, err := Compose([]Panel{{solid(10, 20, red), ""}, {solid(30, 10, blue), ""}}, ComposeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if b := sheet.Bounds(); b.Dx() != 76 || b.Dy() != 44 {
		t.Fatalf("sheet %v, want 76×44", b)
	}
	for _, c := range []struct {
		x, y int
		want color.NRGBA
	}{{12, 12, red}, {21, 31, red}, {22, 12, Light}, {34, 17, blue}, {63, 26, blue}, {34, 16, Light}, {34, 27, Light}} {
		if got := sheet.NRGBAAt(c.x, c.y); got != c.want {
			t.Errorf("pixel (%d,%d) = %v, want %v", c.x, c.y, got, c.want)
		}
	}
	// Scaling to a height and captions make it taller; nearest-neighbour
	// scaling of a solid picture keeps its colour.
	sheet, err = Compose([]Panel{{solid(10, 20, red), "a caption"}}, ComposeOptions{Height: 40, Pixels: true, Gap: 4})
	if err != nil {
		t.Fatal(err)
	}
	// By hand: 10×20 scaled to height 40 is 20 wide; gap 4 each side.
	if b := sheet.Bounds(); b.Dx() != 4+20+4 || b.Dy() <= 4+40+4 {
		t.Errorf("scaled sheet %v, want 28 wide and taller than 48", b)
	}
	if got := sheet.NRGBAAt(4+10, 4+39); got != red {
		t.Errorf("scaled picture pixel %v, want red", got)
	}
}

func TestComposeErrors(t *testing.T) {
	for _, c := range []struct {
		name   string
		panels []Panel
		o      ComposeOptions
		want   string
	}{
		{"none", nil, ComposeOptions{}, "no pictures"},
		{"nil", []Panel{{nil, "x"}}, ComposeOptions{}, "picture 0 is missing"},
		{"empty", []Panel{{image.NewNRGBA(image.Rect(0, 0, 0, 3)), ""}}, ComposeOptions{}, "picture 0 is empty"},
		{"negative", []Panel{{solid(1, 1, Light), ""}}, ComposeOptions{Gap: -1}, "negative"},
		{"huge", []Panel{{solid(1, 100, Light), ""}}, ComposeOptions{Height: 1 << 20}, "above"},
	} {
		t.Run(c.name, func(t *testing.T) {
			_, err := Compose(c.panels, c.o)
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("%s: error %v, want one containing %q", c.name, err, c.want)
			}
		})
	}
}

func reportInput() ReportInput {
	g, pos := goldenScores()
	heat := OverlayScores(goldenBase(), g, pos, pos, 16, 0.4, 0.85)
	return ReportInput{
		Image:     goldenBase(),
		TopK:      []classes.Prediction{{Index: 3, Label: "hex bolt", Probability: 0.62}, {Index: 1, Label: "wing nut", Probability: 0.21}},
		Expected:  "wing nut",
		Panels:    []Panel{{heat, "hex bolt"}, {heat, "wing nut"}},
		Legend:    ColorBar(600, 90, -0.4, 0.4, "drop in probability", Diverging),
		ModelName: "parts.onnx",
		Settings:  []string{"patch 16 px, stride 8 px, fill grey"},
		Date:      "2025-01-02",
	}
}

func TestReport(t *testing.T) {
	in := reportInput()
	before := slices.Clone(in.Image.(*image.NRGBA).Pix)
	a := Report(in)
	if b := a.Bounds(); b.Dx() != ReportWidth || b.Dy() != ReportHeight {
		t.Fatalf("report %v, want %d×%d", b, ReportWidth, ReportHeight)
	}
	// Deterministic: the same input draws the same page.
	if b := Report(in); !bytes.Equal(a.Pix, b.Pix) {
		t.Error("two reports of the same input differ")
	}
	if !bytes.Equal(before, in.Image.(*image.NRGBA).Pix) {
		t.Error("Report changed its input image")
	}
	// The header band and the caution box are where the layout puts them.
	if got := a.NRGBAAt(5, 5); got != repHeader {
		t.Errorf("header pixel %v, want %v", got, repHeader)
	}
	cautionTop := ReportHeight - 64 - 40 - 24 - (50 + 2*24 + 16) // the caution wraps to 2 lines
	if got := a.NRGBAAt(70, cautionTop+5); got != flagMild {
		t.Errorf("caution stripe pixel %v, want %v", got, flagMild)
	}
	if got := a.NRGBAAt(ReportWidth-70, cautionTop+5); got != repCaution {
		t.Errorf("caution box pixel %v, want %v", got, repCaution)
	}
	// The caution's text is drawn: the box has ink in it.
	ink := 0
	for y := cautionTop + 50; y < cautionTop+50+48; y++ {
		for x := 100; x < ReportWidth-100; x++ {
			if a.NRGBAAt(x, y) != repCaution {
				ink++
			}
		}
	}
	if ink < 500 {
		t.Errorf("caution box has %d inked pixels: text missing", ink)
	}
	if !strings.Contains(Caution, "evidence about this model on this image, not proof") {
		t.Error("caution wording lost")
	}
	// Missing parts do not panic and keep the page size.
	if e := Report(ReportInput{}); e.Bounds().Dx() != ReportWidth {
		t.Error("empty report has the wrong size")
	}
}
