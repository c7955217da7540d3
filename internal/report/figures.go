package report

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"

	"github.com/tauvox/tauvox/io/preview"
	"github.com/tauvox/tauvox/roi/phantom"
)

// Verdict colours, from the Okabe–Ito palette (Okabe & Ito, "Color
// Universal Design", 2008; common practice for colour-vision-deficiency
// safe categories): bluish green for pass, vermillion for fail, reddish
// purple for undetermined, grey for not measured. Outlines also differ in
// form (fail thicker, undetermined and not-measured dashed), so the verdict
// does not rest on colour alone.
var (
	passColor = color.RGBA{0, 158, 115, 255}
	failColor = color.RGBA{213, 94, 0, 255}
	undColor  = color.RGBA{204, 121, 167, 255}
	nmColor   = color.RGBA{170, 170, 170, 255}
)

func verdictColor(v string) color.RGBA {
	switch v {
	case phantom.Pass:
		return passColor
	case phantom.Fail:
		return failColor
	case phantom.Undetermined:
		return undColor
	}
	return nmColor
}

// previewWidth is the displayed width of a map slice, in pixels.
const previewWidth = 480

// renderView draws the view's slice with its regions and its colour bar,
// both PNG-encoded.
func renderView(v *View) (mapPNG, barPNG []byte, err error) {
	if v.Nx < 1 || v.Ny < 1 || len(v.Values) != v.Nx*v.Ny {
		return nil, nil, fmt.Errorf("report: view of %s: %d values for a %d×%d slice", v.Quantity, len(v.Values), v.Nx, v.Ny)
	}
	if v.Nx > 1<<14 || v.Ny > 1<<14 {
		return nil, nil, errors.New("report: view of " + v.Quantity + ": slice too large")
	}
	dx, dy := v.PixelMM[0], v.PixelMM[1]
	if !(dx > 0) || !(dy > 0) || math.IsInf(dx, 0) || math.IsInf(dy, 0) {
		dx, dy = 1, 1
	}
	p := previewWidth / (float64(v.Nx) * dx) // display pixels per mm
	w := previewWidth
	h := max(1, min(int(math.Round(float64(v.Ny)*dy*p)), 3*previewWidth))
	cm, rev := preview.ForQuantity(v.Quantity)
	if rev {
		cm = cm.Reversed()
	}
	lo, hi := v.Window.Resolve(v.Values)
	img := preview.Slice(image.NewRGBA(image.Rect(0, 0, w, h)), v.Values, v.Nx, v.Ny, cm, lo, hi, preview.Black)
	sx, sy := float64(w)/float64(v.Nx), float64(h)/float64(v.Ny)
	for _, r := range v.Regions {
		// Pixel (i, j) covers display x ∈ [i·sx, (i+1)·sx) and, j running
		// upwards, y ∈ [(ny−1−j)·sy, (ny−j)·sy).
		cx := (r.I + 0.5) * sx
		cy := (float64(v.Ny) - 0.5 - r.J) * sy
		rad := r.Radius * sx
		outline(img, cx, cy, rad, r.Verdict)
	}
	for _, r := range v.Regions {
		cx := (r.I + 0.5) * sx
		cy := (float64(v.Ny) - 0.5 - r.J) * sy
		label(img, cx, cy, r.Radius*sx, r.ID, r.Verdict)
	}
	unit := v.Unit
	if unit == "" {
		unit = preview.DefaultUnit(v.Quantity)
	}
	bar := preview.ColorBar(cm, lo, hi, unit, preview.Black, min(max(h-3*preview.TextHeight-20, 96), 400))
	if mapPNG, err = encodePNG(img); err != nil {
		return nil, nil, err
	}
	if barPNG, err = encodePNG(bar); err != nil {
		return nil, nil, err
	}
	return mapPNG, barPNG, nil
}

// outline draws a circle of radius rad around (cx, cy): a ring in the
// verdict's colour (2 px, 3 px for fail) with a 1 px black halo on each
// side so it shows on any colour; dashed for not measured.
func outline(img *image.RGBA, cx, cy, rad float64, verdict string) {
	if !(rad > 0) || math.IsInf(rad, 0) || math.IsNaN(cx) || math.IsNaN(cy) {
		return
	}
	half := 1.0
	if verdict == phantom.Fail {
		half = 1.5
	}
	c := verdictColor(verdict)
	b := img.Bounds()
	x0, x1 := max(b.Min.X, int(cx-rad-4)), min(b.Max.X, int(cx+rad+5))
	y0, y1 := max(b.Min.Y, int(cy-rad-4)), min(b.Max.Y, int(cy+rad+5))
	for y := y0; y < y1; y++ {
		for x := x0; x < x1; x++ {
			dx, dy := float64(x)+0.5-cx, float64(y)+0.5-cy
			d := math.Abs(math.Hypot(dx, dy) - rad)
			switch {
			case d <= half:
				if verdict != phantom.Pass && verdict != phantom.Fail {
					// 16 dashes around the circle.
					a := math.Atan2(dy, dx) + math.Pi
					if int(a/(math.Pi/8))%2 == 1 {
						img.SetRGBA(x, y, color.RGBA{0, 0, 0, 255})
						continue
					}
				}
				img.SetRGBA(x, y, c)
			case d <= half+1:
				img.SetRGBA(x, y, color.RGBA{0, 0, 0, 255})
			}
		}
	}
}

// label writes the vial id above its outline (below it when there is no
// room above), on a box of the verdict's colour.
func label(img *image.RGBA, cx, cy, rad float64, id, verdict string) {
	if math.IsNaN(cx) || math.IsNaN(cy) || math.IsInf(rad, 0) {
		return
	}
	id = shortID(id)
	w := preview.TextWidth(id) + 4
	h := preview.TextHeight + 4
	x := int(cx) - w/2
	y := int(cy-rad) - h - 3
	if y < 0 {
		y = int(cy+rad) + 3
	}
	b := img.Bounds()
	x = max(b.Min.X, min(x, b.Max.X-w))
	y = max(b.Min.Y, min(y, b.Max.Y-h))
	fg := color.RGBA{255, 255, 255, 255}
	if verdict != phantom.Pass && verdict != phantom.Fail {
		fg = color.RGBA{0, 0, 0, 255}
	}
	preview.DrawLabel(img, x, y, id, fg, verdictColor(verdict))
}

func encodePNG(img image.Image) ([]byte, error) {
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		return nil, fmt.Errorf("report: encoding PNG: %w", err)
	}
	return b.Bytes(), nil
}

// shortID cuts a vial id to 12 characters for picture and plot labels
// (the results table shows it whole).
func shortID(id string) string {
	if r := []rune(id); len(r) > 12 {
		return string(r[:10]) + ".." // ASCII: the bitmap face has no ellipsis
	}
	return id
}
