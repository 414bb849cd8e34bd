package viz

import (
	"image"
	"image/color"
	"math"
	"sync"
	"unicode/utf8"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/font/gofont/gobold"
	"golang.org/x/image/font/gofont/gomono"
	"golang.org/x/image/font/gofont/goregular"
	"golang.org/x/image/font/opentype"
	"golang.org/x/image/math/fixed"
)

// TextStyle says how [DrawText] draws a line of text.
//
// Size is the em size in pixels of the Go fonts (golang.org/x/image/font/gofont,
// BSD licence, embedded in x/image). Size 0 selects the 7×13 bitmap face of
// golang.org/x/image/font/basicfont instead: crisp at small sizes and drawn
// identically on every platform, which is why tile and grid labels use it.
// Bold and Mono pick the Go Bold and Go Mono faces (ignored by the bitmap
// face). Tracking adds that many pixels after every character (for spaced
// capitals in headings). The zero Color means the default dark ink.
type TextStyle struct {
	Size     float64
	Bold     bool
	Mono     bool
	Tracking float64
	Color    color.NRGBA
}

var parsedFonts = sync.OnceValue(func() map[string]*opentype.Font {
	fonts := map[string]*opentype.Font{}
	for name, ttf := range map[string][]byte{"regular": goregular.TTF, "bold": gobold.TTF, "mono": gomono.TTF} {
		f, err := opentype.Parse(ttf)
		if err != nil {
			panic("viz: embedded Go font " + name + " does not parse: " + err.Error())
		}
		fonts[name] = f
	}
	return fonts
})

// face returns a new face for the style. Faces cache glyphs and are not safe
// for concurrent use, so each call gets its own.
func (st TextStyle) face() font.Face {
	if st.Size <= 0 {
		return basicfont.Face7x13
	}
	name := "regular"
	if st.Mono {
		name = "mono"
	} else if st.Bold {
		name = "bold"
	}
	f, err := opentype.NewFace(parsedFonts()[name], &opentype.FaceOptions{Size: st.Size, DPI: 72, Hinting: font.HintingFull})
	if err != nil {
		panic("viz: font face of size " + fmtG(st.Size) + ": " + err.Error())
	}
	return f
}

func (st TextStyle) ink() color.NRGBA {
	if st.Color == (color.NRGBA{}) {
		return inkDark
	}
	return st.Color
}

// lineMetrics returns the ascent and the line height in whole pixels.
func lineMetrics(f font.Face) (ascent, height int) {
	m := f.Metrics()
	ascent = m.Ascent.Ceil()
	return ascent, ascent + m.Descent.Ceil()
}

// TextSize returns the width of s and the height of one line in the style,
// in pixels.
func TextSize(s string, st TextStyle) (w, h int) {
	f := st.face()
	_, h = lineMetrics(f)
	adv := font.MeasureString(f, s)
	if st.Tracking != 0 {
		adv += fixed.Int26_6(math.Round(st.Tracking*64)) * fixed.Int26_6(utf8.RuneCountInString(s))
	}
	return adv.Ceil(), h
}

// DrawText draws s on dst with the top-left corner of its line box at (x, y)
// and returns the width drawn. Text outside dst is clipped; dst is the only
// thing modified.
func DrawText(dst *image.NRGBA, x, y int, s string, st TextStyle) int {
	f := st.face()
	asc, _ := lineMetrics(f)
	d := &font.Drawer{Dst: dst, Src: image.NewUniform(st.ink()), Face: f, Dot: fixed.P(x, y+asc)}
	start := d.Dot.X
	if st.Tracking == 0 {
		d.DrawString(s)
	} else {
		t := fixed.Int26_6(math.Round(st.Tracking * 64))
		for _, r := range s {
			d.DrawString(string(r))
			d.Dot.X += t
		}
	}
	return (d.Dot.X - start).Ceil()
}

// drawTextCentered draws s centred horizontally on cx.
func drawTextCentered(dst *image.NRGBA, cx, y int, s string, st TextStyle) {
	w, _ := TextSize(s, st)
	DrawText(dst, cx-w/2, y, s, st)
}

// fitText shortens s with a trailing "…" (or "..." for the bitmap face, which
// has no ellipsis glyph) until it fits in w pixels.
func fitText(s string, w int, st TextStyle) string {
	if tw, _ := TextSize(s, st); tw <= w {
		return s
	}
	ell := "…"
	if st.Size <= 0 {
		ell = "..."
	}
	r := []rune(s)
	for len(r) > 0 {
		r = r[:len(r)-1]
		if tw, _ := TextSize(string(r)+ell, st); tw <= w {
			return string(r) + ell
		}
	}
	return ""
}

// wrapText splits s into lines no wider than w pixels, breaking at spaces
// (a single word wider than w gets a line of its own).
func wrapText(s string, w int, st TextStyle) []string {
	var lines []string
	var cur string
	word := ""
	flush := func() {
		if word == "" {
			return
		}
		try := word
		if cur != "" {
			try = cur + " " + word
		}
		if tw, _ := TextSize(try, st); tw <= w || cur == "" {
			cur = try
		} else {
			lines = append(lines, cur)
			cur = word
		}
		word = ""
	}
	for _, r := range s {
		if r == ' ' || r == '\n' {
			flush()
			if r == '\n' {
				lines = append(lines, cur)
				cur = ""
			}
			continue
		}
		word += string(r)
	}
	flush()
	if cur != "" {
		lines = append(lines, cur)
	}
	return lines
}

// fmtG formats a number compactly for labels: at most 3 significant digits,
// no exponent between 1e-3 and 1e5.
func fmtG(v float64) string {
	switch {
	case v == 0:
		return "0"
	case math.Abs(v) >= 1e5 || math.Abs(v) < 1e-3:
		return trimExp(v)
	}
	digits := 2 - int(math.Floor(math.Log10(math.Abs(v))))
	digits = max(0, digits)
	s := formatFixed(v, digits)
	return s
}
