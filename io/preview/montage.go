package preview

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"math"

	"github.com/tauvox/tauvox/volume"
)

// Options control Montage. The zero value (or nil) is right for a map of
// unknown quantity: grey table, automatic window, black invalid colour.
type Options struct {
	// Quantity chooses the colour table and its direction with
	// ForQuantity, and the default unit ("T1", "R2star", "T2map", ...).
	Quantity string
	// Unit is printed above the colour bar; empty means
	// DefaultUnit(Quantity).
	Unit string
	// Window is the display window; the zero value means AutoRange of
	// the map (1st–99th percentile of its finite values).
	Window Window
	// Map, when not nil, replaces the table chosen by Quantity, used as
	// given (not reversed).
	Map *ColorMap
	// Invalid, when not nil, replaces the reserved colour of invalid
	// voxels (default Black).
	Invalid *color.RGBA
	// Zoom is the number of image pixels per voxel along the finer of
	// the two in-plane voxel sizes; 0 chooses one so that a slice is
	// at least 128 pixels across (at least 1, at most 8): a 128-voxel
	// slice is drawn at one pixel per voxel.
	Zoom int
	// Columns is the number of slices per row; 0 means ⌈√nz⌉.
	Columns int
	// Title is drawn above the slices when not empty.
	Title string
}

const (
	margin  = 10
	tileGap = 4
)

// Montage draws every slice k = 0..nz−1 of a 3-D map side by side, in
// rows of Columns slices starting at the top left, each labelled with its
// index, and a colour bar with units on the right. Each slice is drawn as
// Slice draws it, with its in-plane aspect ratio taken from the affine's
// voxel sizes. A nil o means the zero Options.
//
// It returns an error for an image that is not a valid single volume.
func Montage(im *volume.Image, o *Options) (*image.RGBA, error) {
	if o == nil {
		o = &Options{}
	}
	if im == nil {
		return nil, errors.New("preview: montage of a nil image")
	}
	if err := im.Validate(); err != nil {
		return nil, fmt.Errorf("preview: montage: %w", err)
	}
	if im.Dims[3] != 1 {
		return nil, fmt.Errorf("preview: montage of an image with %d volumes; give one 3-D map", im.Dims[3])
	}
	nx, ny, nz := im.Dims[0], im.Dims[1], im.Dims[2]
	cm := paletteTable(colorMap(o))
	invalid := Black
	if o.Invalid != nil {
		invalid = *o.Invalid
	}
	unit := o.Unit
	if unit == "" {
		unit = DefaultUnit(o.Quantity)
	}
	lo, hi := o.Window.Resolve(im.Data)

	tw, th := tileSize(nx, ny, im.Affine.VoxelSize(), o.Zoom)
	cols := o.Columns
	if cols <= 0 {
		cols = int(math.Ceil(math.Sqrt(float64(nz))))
	}
	cols = min(cols, nz)
	rows := (nz + cols - 1) / cols
	gridW := cols*tw + (cols-1)*tileGap
	gridH := rows*th + (rows-1)*tileGap
	titleH := 0
	if o.Title != "" {
		titleH = lineH + 8
	}
	bar := ColorBar(cm, lo, hi, unit, invalid, min(max(gridH-3*lineH-16, 96), 400))
	w := margin + gridW + 16 + bar.Bounds().Dx() + margin
	h := margin + titleH + max(gridH, bar.Bounds().Dy()) + margin
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	draw.Draw(img, img.Bounds(), image.NewUniform(white), image.Point{}, draw.Src)
	if o.Title != "" {
		DrawText(img, margin, margin, o.Title, ink)
	}
	y0 := margin + titleH
	for k := 0; k < nz; k++ {
		x := margin + (k%cols)*(tw+tileGap)
		y := y0 + (k/cols)*(th+tileGap)
		tile := img.SubImage(image.Rect(x, y, x+tw, y+th)).(*image.RGBA)
		Slice(tile, im.Data[k*nx*ny:(k+1)*nx*ny], nx, ny, cm, lo, hi, invalid)
		if tw >= 40 && th >= lineH+6 {
			// White on an opaque black box: a translucent box blended
			// with the voxels beneath made colours of its own, too many
			// for a palette where the corner of a slice holds values.
			DrawLabel(img, x+1, y+1, fmt.Sprint(k), white, color.RGBA{0, 0, 0, 255})
		}
	}
	draw.Draw(img, bar.Bounds().Add(image.Pt(margin+gridW+16, y0)), bar, image.Point{}, draw.Src)
	return img, nil
}

// colorMap returns the table of o, reversed for rate maps.
func colorMap(o *Options) ColorMap {
	if o.Map != nil {
		return *o.Map
	}
	cm, rev := ForQuantity(o.Quantity)
	if rev {
		cm = cm.Reversed()
	}
	return cm
}

// montageColors is the most table entries a montage draws: with the
// white background, the ink of its text, the colour bar's frame and the
// invalid colour, at most 256 colours in all, so that the PNG is written
// with a palette (encodePNG).
const montageColors = 252

// paletteTable returns cm with at most montageColors entries: a longer
// table (matplotlib's have 256) is sampled at evenly spaced entries, its
// first and last kept (entry k of the result is entry round(k·(n−1)/251)
// of cm). A montage then shows 252 levels instead of 256, a step of
// 0.4 % of the window instead of 0.39 %; its file is half the size and
// takes half the time to compress (one byte per pixel instead of three).
// The table of a reversed map samples to the reverse of the forward one.
func paletteTable(cm ColorMap) ColorMap {
	n := len(cm.Colors)
	if n <= montageColors {
		return cm
	}
	c := make([]color.RGBA, montageColors)
	for k := range c {
		c[k] = cm.Colors[(2*k*(n-1)+montageColors-1)/(2*(montageColors-1))]
	}
	return ColorMap{Name: cm.Name, Colors: c}
}

// tileSize returns the displayed size of an nx×ny slice with voxel sizes
// vs (mm) at zoom pixels per voxel along the finer axis.
func tileSize(nx, ny int, vs [3]float64, zoom int) (w, h int) {
	dx, dy := vs[0], vs[1]
	if !(dx > 0) || math.IsInf(dx, 0) || !(dy > 0) || math.IsInf(dy, 0) {
		dx, dy = 1, 1
	}
	if zoom <= 0 {
		zoom = min(max(int(math.Ceil(128/float64(max(nx, ny)))), 1), 8)
	}
	p := float64(zoom) / math.Min(dx, dy) // pixels per mm
	w = max(int(math.Round(float64(nx)*dx*p)), 1)
	h = max(int(math.Round(float64(ny)*dy*p)), 1)
	return w, h
}
