package preview

import (
	"bufio"
	"fmt"
	"image"
	"image/png"
	"io"

	"github.com/tauvox/tauvox/internal/output"
)

// WritePNG encodes img as PNG to path atomically: it writes a temporary
// file in the same folder and renames it to path only when everything was
// written, so a failure leaves no partial file behind. An existing file at
// path is replaced. The file gets mode 0644.
func WritePNG(path string, img image.Image) error {
	return output.WriteWith(path, func(w io.Writer) error { return encode(w, img) })
}

// encode writes an opaque RGBA image with encodePNG and any other with
// image/png (which turns premultiplied alpha into PNG's straight alpha).
func encode(w io.Writer, img image.Image) error {
	if rgba, ok := img.(*image.RGBA); ok && rgba.Opaque() {
		return encodePNG(w, rgba)
	}
	bw := bufio.NewWriter(w)
	if err := png.Encode(bw, img); err != nil {
		return fmt.Errorf("encoding PNG: %w", err)
	}
	return bw.Flush()
}
