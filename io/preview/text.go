package preview

import (
	"image"
	"image/color"
	"image/draw"
	"math"
	"strconv"

	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/math/fixed"
)

// Text is drawn with the 7×13 bitmap face of golang.org/x/image: fixed
// size, no anti-aliasing, identical on every machine (golden files).
var face = basicfont.Face7x13

const (
	charW   = 7  // advance of basicfont.Face7x13
	lineH   = 13 // height of basicfont.Face7x13
	ascent  = 11 // ascent of basicfont.Face7x13
	textPad = 2
)

// DrawText draws s with its top-left corner at (x, y) in colour c. The
// face has glyphs for ASCII and Latin-1 only; Drawable folds the rest.
func DrawText(dst draw.Image, x, y int, s string, c color.Color) {
	d := font.Drawer{Dst: dst, Src: image.NewUniform(c), Face: face, Dot: fixed.P(x, y+ascent)}
	d.DrawString(Drawable(s))
}

// TextWidth returns the width in pixels of s drawn by DrawText.
func TextWidth(s string) int { return font.MeasureString(face, Drawable(s)).Ceil() }

// Drawable returns s with every rune the face has no glyph for replaced,
// so that no label shows a missing-glyph box: typographic minus and dashes
// by "-", ≤ ≥ by "<=" ">=", Greek letters of units by their names (µ is
// Latin-1 and stays), anything else by "?".
func Drawable(s string) string {
	ok := true
	for _, r := range s {
		if !hasGlyph(r) {
			ok = false
			break
		}
	}
	if ok {
		return s
	}
	var b []rune
	for _, r := range s {
		switch {
		case hasGlyph(r):
			b = append(b, r)
		case r == '−' || r == '–' || r == '—' || r == '‐':
			b = append(b, '-')
		case r == '≤':
			b = append(b, '<', '=')
		case r == '≥':
			b = append(b, '>', '=')
		case r == '…':
			b = append(b, '.', '.', '.')
		case r == 'α':
			b = append(b, []rune("alpha")...)
		case r == 'σ':
			b = append(b, []rune("sigma")...)
		case r == 'ρ':
			b = append(b, []rune("rho")...)
		default:
			b = append(b, '?')
		}
	}
	return string(b)
}

// hasGlyph reports whether the face draws r (printable ASCII and Latin-1).
func hasGlyph(r rune) bool { return r >= 0x20 && r <= 0x7e || r >= 0xa1 && r <= 0xff }

// TextHeight is the height in pixels of a line drawn by DrawText.
const TextHeight = 13

// DrawLabel draws s on a filled box of colour bg (padding 2 px) with its
// top-left corner at (x, y). A translucent bg is blended over what lies
// beneath (draw.Over), so an opaque image stays opaque.
func DrawLabel(dst draw.Image, x, y int, s string, fg, bg color.Color) {
	r := image.Rect(x, y, x+TextWidth(s)+2*textPad, y+lineH+2*textPad)
	draw.Draw(dst, r, image.NewUniform(bg), image.Point{}, draw.Over)
	DrawText(dst, x+textPad, y+textPad, s, fg)
}

// formatTick formats a colour-bar value with as many decimals as the
// window's width needs (at least 3 significant digits of the width).
func formatTick(v, lo, hi float64) string {
	w := math.Abs(hi - lo)
	dec := 0
	if w > 0 {
		dec = 2 - int(math.Floor(math.Log10(w)))
	}
	dec = max(0, min(dec, 6))
	if a := math.Abs(v); a >= 1e6 || (a != 0 && a < 1e-4) {
		return strconv.FormatFloat(v, 'g', 3, 64)
	}
	if v == 0 {
		v = 0 // drop a negative zero
	}
	return strconv.FormatFloat(v, 'f', dec, 64)
}
