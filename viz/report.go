package viz

import (
	"fmt"
	"fovea/modelio/classes"
	"image"
	"image/color"
	"math"
	"strings"
)

// Caution is the sentence every report carries (house rule: pictures that
// could mislead say what they are).
const Caution = "A heatmap is evidence about this model on this image, not proof of what the model has learned in general: " +
	"another image, another model or other occlusion settings can give a different picture."

// ReportInput is what the one-page report shows.
type ReportInput struct {
	Image image.Image          // the image as the model saw it
	TopK  []classes.Prediction // the model's top predictions, most probable first (at most 8 drawn)
	// Expected is the label the user expected, when the report explains a
	// misclassification; "" when none. A prediction with this label is marked.
	Expected  string
	Panels    []Panel     // heatmaps with captions, drawn left to right, at most 3 per row
	Legend    image.Image // the colour bar of the panels (ColorBar), or nil
	ModelName string
	Settings  []string // one setting per line ("patch 16 px, stride 8 px", ...)
	Date      string   // as it should be printed; the report never reads the clock
	// Caution is added after the package's Caution sentence, which every
	// report carries (for example what the settings leave out); "" adds
	// nothing. At most 5 lines of caution are drawn.
	Caution string
}

// Report page geometry: A4 portrait at 150 dots per inch.
const (
	ReportWidth  = 1240
	ReportHeight = 1754
)

// The report's own colours: a deep slate header, an orange accent taken from
// the positive end of Diverging, amber for the caution box.
var (
	repHeader  = color.NRGBA{0x1f, 0x2b, 0x38, 0xff}
	repAccent  = Diverging(1)
	repRule    = color.NRGBA{0xd9, 0xdd, 0xe1, 0xff}
	repTrack   = color.NRGBA{0xec, 0xee, 0xf1, 0xff}
	repBar     = color.NRGBA{0x4a, 0x5d, 0x73, 0xff}
	repBarTop  = color.NRGBA{0x1f, 0x2b, 0x38, 0xff}
	repCaution = color.NRGBA{0xfd, 0xf3, 0xdc, 0xff}
	repSubtle  = color.NRGBA{0xaf, 0xbb, 0xc8, 0xff}
)

// Report composes the one-page picture of an "explain this prediction" run:
// a header band with the question and the model, the input image beside the
// top predictions, the heatmap panels with their legend, the settings used
// and the caution. The page is ReportWidth×ReportHeight, white, with 64-pixel
// margins; missing parts (no image, no panels) leave a marked gap rather
// than a shorter page, so reports always line up when printed together.
func Report(in ReportInput) *image.NRGBA {
	const (
		W, H   = ReportWidth, ReportHeight
		margin = 64
		inner  = W - 2*margin
	)
	img := mustCanvas("report", W, H, Light)

	// Header band.
	const headH = 168
	fill(img, image.Rect(0, 0, W, headH), repHeader)
	fill(img, image.Rect(0, headH, W, headH+6), repAccent)
	brand := TextStyle{Size: 15, Bold: true, Tracking: 3, Color: repAccent}
	DrawText(img, margin, 30, "FOVEA", brand)
	title := "What did the model see?"
	if len(in.TopK) > 0 {
		title = fmt.Sprintf("Why %s?", quoteLabel(in.TopK[0]))
		if in.Expected != "" && in.Expected != in.TopK[0].Label {
			title = fmt.Sprintf("Why %s and not \u201c%s\u201d?", quoteLabel(in.TopK[0]), in.Expected)
		}
	}
	titleSt := TextStyle{Size: 40, Bold: true, Color: color.NRGBA{0xff, 0xff, 0xff, 0xff}}
	DrawText(img, margin, 58, fitText(title, inner, titleSt), titleSt)
	sub := []string{}
	if in.ModelName != "" {
		sub = append(sub, "Model "+in.ModelName)
	}
	if in.Expected != "" {
		sub = append(sub, "expected "+in.Expected)
	}
	if in.Date != "" {
		sub = append(sub, in.Date)
	}
	subSt := TextStyle{Size: 20, Color: repSubtle}
	DrawText(img, margin, 116, fitText(strings.Join(sub, "  ·  "), inner, subSt), subSt)

	// Section 1: input image and top predictions.
	y := headH + 6 + 44
	const imgBox = 460
	section(img, margin, y, imgBox, "Input")
	section(img, margin+imgBox+48, y, inner-imgBox-48, "Top predictions")
	y += 40
	box := image.Rect(margin, y, margin+imgBox, y+imgBox)
	fill(img, box, repTrack)
	if in.Image != nil && !in.Image.Bounds().Empty() {
		r := scaleTo(img, flatten(in.Image, Light), box, false)
		frame(img, r.Inset(-1), 1, repRule, false)
	} else {
		drawTextCentered(img, box.Min.X+imgBox/2, box.Min.Y+imgBox/2-12, "no image", TextStyle{Size: 20, Color: inkMuted})
	}
	predictions(img, image.Rect(margin+imgBox+48, y, W-margin, y+imgBox), in.TopK, in.Expected)
	y += imgBox + 48

	// Section 2: the heatmaps.
	section(img, margin, y, inner, "Where the evidence is")
	y += 40
	footTop := H - 64 - 40 // footer line
	cst := TextStyle{Size: 19, Color: inkDark}
	caution := Caution
	if in.Caution != "" {
		caution += " " + in.Caution
	}
	cautionLines := wrapText(caution, inner-64, cst)
	if len(cautionLines) > 5 {
		cautionLines = append(cautionLines[:4], fitText(strings.Join(cautionLines[4:], " "), inner-64, cst))
	}
	cautionH := 50 + 24*len(cautionLines) + 16
	cautionTop := footTop - 24 - cautionH // caution box
	settingsTop := cautionTop - 24 - settingsHeight(in.Settings)
	legendH := 0
	if in.Legend != nil && !in.Legend.Bounds().Empty() {
		legendH = min(in.Legend.Bounds().Dy(), 120) + 16
	}
	panelArea := image.Rect(margin, y, W-margin, settingsTop-24-legendH)
	if len(in.Panels) > 0 {
		drawPanels(img, panelArea, in.Panels)
	} else {
		fill(img, panelArea, repTrack)
		drawTextCentered(img, panelArea.Min.X+panelArea.Dx()/2, panelArea.Min.Y+panelArea.Dy()/2-12, "no heatmap", TextStyle{Size: 20, Color: inkMuted})
	}
	if legendH > 0 {
		lb := in.Legend.Bounds()
		lw, lh := min(lb.Dx(), inner), min(lb.Dy(), 120)
		r := image.Rect(W/2-lw/2, panelArea.Max.Y+16, W/2-lw/2+lw, panelArea.Max.Y+16+lh)
		if lw == lb.Dx() && lh == lb.Dy() {
			paste(img, in.Legend, r.Min)
		} else {
			scaleTo(img, in.Legend, r, false)
		}
	}

	// Section 3: settings.
	if len(in.Settings) > 0 {
		section(img, margin, settingsTop, inner, "Settings")
		st := TextStyle{Size: 17, Mono: true, Color: inkMuted}
		for i, s := range in.Settings {
			DrawText(img, margin, settingsTop+40+i*24, fitText(s, inner, st), st)
		}
	}

	// Caution box.
	cb := image.Rect(margin, cautionTop, W-margin, cautionTop+cautionH)
	fill(img, cb, repCaution)
	fill(img, image.Rect(cb.Min.X, cb.Min.Y, cb.Min.X+8, cb.Max.Y), flagMild)
	DrawText(img, cb.Min.X+32, cb.Min.Y+18, "Read with care", TextStyle{Size: 20, Bold: true, Color: inkDark})
	for i, line := range cautionLines {
		DrawText(img, cb.Min.X+32, cb.Min.Y+50+i*24, line, cst)
	}

	// Footer.
	fill(img, image.Rect(margin, footTop, W-margin, footTop+1), repRule)
	fst := TextStyle{Size: 15, Color: inkMuted}
	DrawText(img, margin, footTop+12, "Made with Fovea", fst)
	if in.Date != "" {
		w, _ := TextSize(in.Date, fst)
		DrawText(img, W-margin-w, footTop+12, in.Date, fst)
	}
	return img
}

// section draws a section heading: spaced capitals in muted ink over a rule.
func section(img *image.NRGBA, x, y, w int, title string) {
	DrawText(img, x, y, strings.ToUpper(title), TextStyle{Size: 15, Bold: true, Tracking: 2, Color: inkMuted})
	fill(img, image.Rect(x, y+26, x+w, y+28), repRule)
}

func quoteLabel(p classes.Prediction) string {
	if p.Label != "" {
		return "\u201c" + p.Label + "\u201d"
	}
	return fmt.Sprintf("class %d", p.Index)
}

func settingsHeight(lines []string) int {
	if len(lines) == 0 {
		return 0
	}
	return 40 + len(lines)*24
}

// predictions draws the top-k list as labelled bars in r.
func predictions(img *image.NRGBA, r image.Rectangle, top []classes.Prediction, expected string) {
	if len(top) == 0 {
		DrawText(img, r.Min.X, r.Min.Y, "no predictions", TextStyle{Size: 20, Color: inkMuted})
		return
	}
	const rowH = 56
	n := min(len(top), 8, r.Dy()/rowH)
	labelSt := TextStyle{Size: 21, Color: inkDark}
	pctSt := TextStyle{Size: 21, Bold: true, Color: inkDark}
	for i := range n {
		p := top[i]
		y := r.Min.Y + i*rowH
		pct := formatPercent(p.Probability)
		pw, _ := TextSize(pct, pctSt)
		name := p.Label
		if name == "" {
			name = fmt.Sprintf("class %d", p.Index)
		}
		st := labelSt
		if i == 0 {
			st.Bold = true
		}
		mark := ""
		if expected != "" && p.Label == expected {
			mark = "  (expected)"
		}
		DrawText(img, r.Min.X, y, fitText(name+mark, r.Dx()-pw-16, st), st)
		DrawText(img, r.Max.X-pw, y, pct, pctSt)
		track := image.Rect(r.Min.X, y+30, r.Max.X, y+40)
		fill(img, track, repTrack)
		bw := int(math.Round(float64(track.Dx()) * math.Max(0, math.Min(1, p.Probability))))
		c := repBar
		if i == 0 {
			c = repBarTop
		}
		if mark != "" {
			c = Diverging(-1)
		}
		fill(img, image.Rect(track.Min.X, track.Min.Y, track.Min.X+bw, track.Max.Y), c)
	}
	if len(top) > n {
		DrawText(img, r.Min.X, r.Min.Y+n*rowH, fmt.Sprintf("and %d more", len(top)-n), TextStyle{Size: 17, Color: inkMuted})
	}
}

// formatPercent prints a probability as a percentage with one decimal, or
// "<0.1%" for small non-zero values.
func formatPercent(p float64) string {
	switch {
	case math.IsNaN(p):
		return "?"
	case p > 0 && p < 0.001:
		return "<0.1%"
	}
	return fmt.Sprintf("%.1f%%", 100*p)
}

// drawPanels lays the heatmaps out in r: up to three per row, as large as
// fits, captions under each.
func drawPanels(img *image.NRGBA, r image.Rectangle, panels []Panel) {
	cols := min(len(panels), 3)
	rows := (len(panels) + cols - 1) / cols
	const gap = 28
	capSt := TextStyle{Size: 19, Color: inkDark}
	_, lineH := TextSize("Ag", capSt)
	capH := 2*lineH + 8
	cellW := (r.Dx() - (cols-1)*gap) / cols
	cellH := (r.Dy()-(rows-1)*gap)/rows - capH
	if cellW <= 0 || cellH <= 0 {
		return
	}
	for i, p := range panels {
		cx := r.Min.X + (i%cols)*(cellW+gap)
		cy := r.Min.Y + (i/cols)*(cellH+capH+gap)
		cell := image.Rect(cx, cy, cx+cellW, cy+cellH)
		var used image.Rectangle
		if p.Image != nil && !p.Image.Bounds().Empty() {
			// Top-align so captions sit right under pictures of any shape.
			sb := p.Image.Bounds()
			s := math.Min(float64(cellW)/float64(sb.Dx()), float64(cellH)/float64(sb.Dy()))
			h := int(math.Round(float64(sb.Dy()) * s))
			used = scaleTo(img, p.Image, image.Rect(cx, cy, cx+cellW, cy+h), false)
			frame(img, used.Inset(-1), 1, repRule, false)
		} else {
			fill(img, cell, repTrack)
			used = cell
		}
		for k, line := range wrapText(p.Caption, cellW, capSt) {
			if k == 2 {
				break
			}
			drawTextCentered(img, cx+cellW/2, used.Max.Y+8+k*lineH, line, capSt)
		}
	}
}
