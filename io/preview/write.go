package preview

import (
	"bufio"
	"fmt"
	"image"
	"image/png"
	"io"
	"os"
	"path/filepath"
)

// WritePNG encodes img as PNG to path atomically: it writes a temporary
// file in the same folder and renames it to path only when everything was
// written, so a failure leaves no partial file behind. An existing file at
// path is replaced. The file gets mode 0644.
func WritePNG(path string, img image.Image) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp*")
	if err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
		}
	}()
	if err = encode(f, img); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = f.Chmod(0o644); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = f.Close(); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if err = os.Rename(tmp, path); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
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
