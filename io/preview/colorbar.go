package preview

import (
	"image"
	"image/color"
	"image/draw"
)

var (
	white    = color.RGBA{255, 255, 255, 255}
	ink      = color.RGBA{20, 20, 20, 255}
	frameCol = color.RGBA{120, 120, 120, 255}
)

const (
	barW     = 18 // colour-bar width, px
	tickLen  = 4
	barTicks = 5 // labelled values on the bar, lo..hi
)

// ColorBar draws a vertical colour bar for the window [lo, hi] of cm:
// the unit on top, the table with the highest value at the top of a bar
// barLen pixels long, five labelled ticks from lo to hi, and below it a
// swatch of the invalid colour labelled "no value". The bar says nothing
// of clipping: values below lo share lo's colour and above hi share hi's.
// A barLen below 64 is taken as 64. The result has a white background.
func ColorBar(cm ColorMap, lo, hi float64, unit string, invalid color.RGBA, barLen int) *image.RGBA {
	if len(cm.Colors) == 0 {
		panic("preview: empty colour map")
	}
	barLen = max(barLen, 64)
	labels := make([]string, barTicks)
	lw := 0
	for k := range labels {
		v := lo + (hi-lo)*float64(k)/float64(barTicks-1)
		labels[k] = formatTick(v, lo, hi)
		lw = max(lw, TextWidth(labels[k]))
	}
	const noValue = "no value"
	top := lineH + 6 // unit line
	w := max(barW+tickLen+3+lw, TextWidth(unit), barW+4+TextWidth(noValue)) + 2
	h := top + barLen + lineH/2 + 8 + lineH + 2
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	draw.Draw(img, img.Bounds(), image.NewUniform(white), image.Point{}, draw.Src)
	DrawText(img, 0, 0, unit, ink)

	// The bar: row r shows the value at the centre of its pixel.
	n := len(cm.Colors)
	for r := 0; r < barLen; r++ {
		k := (barLen - 1 - r) * n / barLen
		c := cm.Colors[k]
		for x := 1; x < barW-1; x++ {
			img.SetRGBA(x, top+r, c)
		}
	}
	frame(img, image.Rect(0, top-1, barW, top+barLen+1), frameCol)
	for k, s := range labels {
		y := top + barLen - 1 - k*(barLen-1)/(barTicks-1)
		for x := barW; x < barW+tickLen; x++ {
			img.SetRGBA(x, y, ink)
		}
		DrawText(img, barW+tickLen+3, y-lineH/2, s, ink)
	}
	sy := top + barLen + lineH/2 + 8
	draw.Draw(img, image.Rect(1, sy+1, barW-1, sy+lineH-1), image.NewUniform(invalid), image.Point{}, draw.Src)
	frame(img, image.Rect(0, sy, barW, sy+lineH), frameCol)
	DrawText(img, barW+4, sy, noValue, ink)
	return img
}

// frame draws the 1-pixel outline of r.
func frame(img *image.RGBA, r image.Rectangle, c color.RGBA) {
	for x := r.Min.X; x < r.Max.X; x++ {
		img.SetRGBA(x, r.Min.Y, c)
		img.SetRGBA(x, r.Max.Y-1, c)
	}
	for y := r.Min.Y; y < r.Max.Y; y++ {
		img.SetRGBA(r.Min.X, y, c)
		img.SetRGBA(r.Max.X-1, y, c)
	}
}
