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

// DrawText draws s with its top-left corner at (x, y) in colour c. Only
// ASCII and Latin-1 letters have glyphs; others are drawn as boxes.
func DrawText(dst draw.Image, x, y int, s string, c color.Color) {
	d := font.Drawer{Dst: dst, Src: image.NewUniform(c), Face: face, Dot: fixed.P(x, y+ascent)}
	d.DrawString(s)
}

// TextWidth returns the width in pixels of s drawn by DrawText.
func TextWidth(s string) int { return font.MeasureString(face, s).Ceil() }

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
