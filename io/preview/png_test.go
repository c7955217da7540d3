package preview

import (
	"bytes"
	"hash/adler32"
	"image"
	"image/color"
	"image/png"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// TestEncodePNG: images written by encode decode with the standard
// library's image/png (an independent decoder) to the same pixels, for
// opaque images (encodePNG, RGB) and images with transparency (left to
// image/png), sizes of one
// pixel to several IDAT chunks, sub-images with an offset, and random as
// well as repetitive content.
func TestEncodePNG(t *testing.T) {
	r := rand.New(rand.NewPCG(1, 2))
	cases := []struct {
		name   string
		w, h   int
		opaque bool
		random bool
	}{
		{"1x1 opaque", 1, 1, true, false},
		{"1x1 alpha", 1, 1, false, false},
		{"random opaque 300x200", 300, 200, true, true},
		{"random alpha 257x3", 257, 3, false, true},
		{"stripes opaque 64x64", 64, 64, true, false},
	}
	for _, c := range cases {
		img := image.NewRGBA(image.Rect(0, 0, c.w, c.h))
		for y := 0; y < c.h; y++ {
			for x := 0; x < c.w; x++ {
				p := color.RGBA{uint8(x * 7), uint8(255 - y*3), uint8(x ^ y), 255}
				if c.random {
					p = color.RGBA{uint8(r.IntN(256)), uint8(r.IntN(256)), uint8(r.IntN(256)), 255}
				}
				if !c.opaque {
					p.A = uint8(r.IntN(256))
					p.R, p.G, p.B = min(p.R, p.A), min(p.G, p.A), min(p.B, p.A) // premultiplied
				}
				img.SetRGBA(x, y, p)
			}
		}
		check := func(name string, src *image.RGBA) {
			var buf bytes.Buffer
			if err := encode(&buf, src); err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			got, err := png.Decode(&buf)
			if err != nil {
				t.Fatalf("%s: image/png cannot decode: %v", name, err)
			}
			b := src.Bounds()
			if got.Bounds().Dx() != b.Dx() || got.Bounds().Dy() != b.Dy() {
				t.Fatalf("%s: size %v, want %v", name, got.Bounds(), b)
			}
			for y := 0; y < b.Dy(); y++ {
				for x := 0; x < b.Dx(); x++ {
					want := src.RGBAAt(b.Min.X+x, b.Min.Y+y)
					g := color.RGBAModel.Convert(got.At(x, y)).(color.RGBA)
					if !c.opaque { // premultiplied ↔ straight alpha rounds by one step
						if d := func(a, b uint8) bool { return a > b+1 || b > a+1 }; !d(g.R, want.R) && !d(g.G, want.G) && !d(g.B, want.B) && g.A == want.A {
							continue
						}
					}
					if g != want {
						t.Fatalf("%s: pixel (%d,%d) = %v, want %v", name, x, y, g, want)
					}
				}
			}
		}
		check(c.name, img)
		if c.w > 2 && c.h > 2 {
			check(c.name+" sub-image", img.SubImage(image.Rect(1, 1, c.w-1, c.h)).(*image.RGBA))
		}
	}
}

// benchMap is a 128×128×24 T2 map like the peer benchmark's: a disc of
// values 20–300 ms in air (NaN).
func benchMap() *volume.Image {
	im := &volume.Image{Dims: [4]int{128, 128, 24, 1}, Affine: volume.Identity()}
	im.Data = make([]float32, 128*128*24)
	for k := 0; k < 24; k++ {
		for j := 0; j < 128; j++ {
			for i := 0; i < 128; i++ {
				v := float32(math.NaN())
				if dx, dy := float64(i-64), float64(j-64); dx*dx+dy*dy < 55*55 {
					v = float32(20 + 280*float64(i)/127 + float64(k))
				}
				im.Data[(k*128+j)*128+i] = v
			}
		}
	}
	return im
}

// BenchmarkMontage draws the montage of a 128×128×24 map (1412×1337
// pixels) and encodes it, with tauvox's encoder and with image/png.
func BenchmarkMontage(b *testing.B) {
	im := benchMap()
	b.Run("draw", func(b *testing.B) {
		for b.Loop() {
			if _, err := Montage(im, &Options{Quantity: "T2", Title: "T2map"}); err != nil {
				b.Fatal(err)
			}
		}
	})
	img, _ := Montage(im, &Options{Quantity: "T2", Title: "T2map"})
	b.Run("encode", func(b *testing.B) {
		var buf bytes.Buffer
		for b.Loop() {
			buf.Reset()
			encodePNG(&buf, img)
		}
		b.ReportMetric(float64(buf.Len()), "bytes")
	})
	b.Run("encode-image-png", func(b *testing.B) {
		var buf bytes.Buffer
		for b.Loop() {
			buf.Reset()
			png.Encode(&buf, img)
		}
		b.ReportMetric(float64(buf.Len()), "bytes")
	})
}

// TestPercentileSelect: the selection-based percentile equals the
// Hyndman–Fan definition 7 (numpy.percentile's default) computed on a
// sorted copy, for random data with many ties, sorted and reversed input,
// and sizes 1 to 1000.
func TestPercentileSelect(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	for n := 1; n <= 1000; n += 1 + n/7 {
		for kind := 0; kind < 4; kind++ {
			s := make([]float64, n)
			for i := range s {
				switch kind {
				case 0:
					s[i] = r.NormFloat64()
				case 1:
					s[i] = float64(r.IntN(5)) // ties
				case 2:
					s[i] = float64(i)
				case 3:
					s[i] = float64(n - i)
				}
			}
			sorted := append([]float64(nil), s...)
			slices.Sort(sorted)
			ref := func(p float64) float64 {
				h := p * float64(n-1)
				k := int(math.Floor(h))
				if k >= n-1 {
					return sorted[n-1]
				}
				return sorted[k] + (h-float64(k))*(sorted[k+1]-sorted[k])
			}
			for _, p := range []float64{0, 0.01, 0.5, 0.99, 1} {
				if got, want := percentile(s, p), ref(p); got != want {
					t.Fatalf("n %d kind %d p %v: %v, want %v", n, kind, p, got, want)
				}
			}
		}
	}
}

// TestAdler32Combine: the Adler-32 of two pieces combined (zlib's
// adler32_combine) equals hash/adler32's checksum of the whole, for
// pieces of 0 bytes to over 65,521 (the modulus), on random bytes.
func TestAdler32Combine(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	data := make([]byte, 300_000)
	for i := range data {
		data[i] = byte(r.Uint32())
	}
	for _, cut := range []int{0, 1, 5552, 65520, 65521, 65522, 200_001, len(data)} {
		a, b := data[:cut], data[cut:]
		got := adler32Combine(adler32.Checksum(a), adler32.Checksum(b), int64(len(b)))
		if want := adler32.Checksum(data); got != want {
			t.Errorf("cut at %d: combined %08x, want %08x", cut, got, want)
		}
	}
}

// TestEncodePNGParts: an image large enough to be compressed in several
// parts (4 here) decodes with image/png to the same pixels, and so does
// one of two parts.
func TestEncodePNGParts(t *testing.T) {
	r := rand.New(rand.NewPCG(5, 6))
	for _, h := range []int{1500, 2900} { // 2 and 4 parts
		img := image.NewRGBA(image.Rect(0, 0, 1000, h))
		for i := 0; i < len(img.Pix); i += 4 {
			v := uint8(r.IntN(8)) // a few levels, runs of repeated pixels
			img.Pix[i], img.Pix[i+1], img.Pix[i+2], img.Pix[i+3] = v*30, 255-v*20, v, 255
		}
		var buf bytes.Buffer
		if err := encodePNG(&buf, img); err != nil {
			t.Fatal(err)
		}
		got, err := png.Decode(&buf)
		if err != nil {
			t.Fatalf("%d rows: image/png cannot decode: %v", h, err)
		}
		for y := 0; y < h; y++ {
			for x := 0; x < 1000; x++ {
				if g := color.RGBAModel.Convert(got.At(x, y)).(color.RGBA); g != img.RGBAAt(x, y) {
					t.Fatalf("%d rows: pixel (%d,%d) = %v, want %v", h, x, y, g, img.RGBAAt(x, y))
				}
			}
		}
	}
}

// TestEncodePNGPalette: an opaque image of at most 256 colours is written
// with a palette (colour type 3, PNG specification §11.2.2: IHDR byte 9)
// and one of 257 in RGB (type 2); image/png decodes both to the same
// pixels. The palette holds the colours in the order they first occur.
func TestEncodePNGPalette(t *testing.T) {
	for _, n := range []int{1, 2, 255, 256, 257, 1000} {
		img := image.NewRGBA(image.Rect(0, 0, 97, 61))
		for i := 0; i < len(img.Pix); i += 4 {
			k := (i / 4 * 7919) % n // every colour occurs, in a scattered order
			img.Pix[i], img.Pix[i+1], img.Pix[i+2], img.Pix[i+3] = uint8(k), uint8(k>>8), uint8(255-k), 255
		}
		var buf bytes.Buffer
		if err := encodePNG(&buf, img); err != nil {
			t.Fatal(err)
		}
		want := byte(3)
		if n > 256 {
			want = 2
		}
		if ct := buf.Bytes()[8+8+9]; ct != want {
			t.Errorf("%d colours: colour type %d, want %d", n, ct, want)
		}
		got, err := png.Decode(bytes.NewReader(buf.Bytes()))
		if err != nil {
			t.Fatalf("%d colours: image/png cannot decode: %v", n, err)
		}
		for y := 0; y < 61; y++ {
			for x := 0; x < 97; x++ {
				if g := color.RGBAModel.Convert(got.At(x, y)).(color.RGBA); g != img.RGBAAt(x, y) {
					t.Fatalf("%d colours: pixel (%d,%d) = %v, want %v", n, x, y, g, img.RGBAAt(x, y))
				}
			}
		}
		if p, ok := got.(*image.Paletted); ok && n <= 256 {
			if len(p.Palette) != n {
				t.Errorf("%d colours: palette of %d", n, len(p.Palette))
			}
			if c := color.RGBAModel.Convert(p.Palette[0]).(color.RGBA); c != img.RGBAAt(0, 0) {
				t.Errorf("%d colours: first palette entry %v, want the first pixel's %v", n, c, img.RGBAAt(0, 0))
			}
		}
	}
}

// TestMontagePalette: a montage of a map with NaN voxels, values below,
// inside and above the window, drawn with a 256-entry table, has at most
// 256 colours and is written with a palette; the table it draws has 252
// entries, its ends those of the full table, and a reversed table samples
// to the reverse of the forward one.
func TestMontagePalette(t *testing.T) {
	im := benchMap()
	for i := 0; i < len(im.Data); i += 97 {
		im.Data[i] = float32(i%400) - 50
	}
	img, err := Montage(im, &Options{Quantity: "T2", Title: "T2map"})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := encodePNG(&buf, img); err != nil {
		t.Fatal(err)
	}
	if ct := buf.Bytes()[8+8+9]; ct != 3 {
		t.Errorf("montage written with colour type %d, want 3 (palette)", ct)
	}
	p := paletteTable(Viridis)
	if len(p.Colors) != montageColors || p.Darkest() != Viridis.Darkest() || p.Brightest() != Viridis.Brightest() {
		t.Errorf("sampled table: %d entries, ends %v %v", len(p.Colors), p.Darkest(), p.Brightest())
	}
	r := paletteTable(Viridis.Reversed())
	for k, c := range r.Colors {
		if c != p.Colors[montageColors-1-k] {
			t.Fatalf("reversed table entry %d = %v, want %v", k, c, p.Colors[montageColors-1-k])
		}
	}
	short := ColorMap{Colors: Viridis.Colors[:100]}
	if got := paletteTable(short); len(got.Colors) != 100 {
		t.Errorf("a table of 100 entries became %d", len(got.Colors))
	}
}
