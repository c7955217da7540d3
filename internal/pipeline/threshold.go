package pipeline

import (
	"bufio"
	"context"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"os"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/volume"
)

// streamThreshold finds the automatic mask over every slab: the
// per-voxel peaks are spilled to a temporary file (4 bytes a voxel) so
// memory does not grow with the series, then binned once the top is known.
func streamThreshold(ctx context.Context, nslab int, slab func(int) (*volume.Image, error), tmpDir string) (fit.AutoMask, error) {
	f, err := os.CreateTemp(tmpDir, ".peaks-*.raw")
	if err != nil {
		return fit.AutoMask{}, err
	}
	// Unlinked at once where the system allows it (Unix), so that not even
	// a killed run leaves it behind; elsewhere removed on return.
	unlinked := os.Remove(f.Name()) == nil
	defer func() {
		f.Close()
		if !unlinked {
			os.Remove(f.Name())
		}
	}()
	var ph fit.PeakHistogram
	var peaks []float32
	bw := bufio.NewWriterSize(f, 1<<20)
	total := 0
	var raw [4 << 10]byte
	for i := 0; i < nslab; i++ {
		if ctx.Err() != nil {
			return fit.AutoMask{}, ctx.Err()
		}
		im, err := slab(i)
		if err != nil {
			return fit.AutoMask{}, err
		}
		peaks = ph.Peaks(peaks, im)
		for lo := 0; lo < len(peaks); lo += len(raw) / 4 {
			part := peaks[lo:min(lo+len(raw)/4, len(peaks))]
			for i, v := range part {
				binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(v))
			}
			if _, err := bw.Write(raw[:4*len(part)]); err != nil {
				return fit.AutoMask{}, fmt.Errorf("%s: %w", f.Name(), err)
			}
		}
		total += len(peaks)
	}
	if err := bw.Flush(); err != nil {
		return fit.AutoMask{}, fmt.Errorf("%s: %w", f.Name(), err)
	}
	if _, err := f.Seek(0, io.SeekStart); err != nil {
		return fit.AutoMask{}, err
	}
	br := bufio.NewReaderSize(f, 1<<20)
	part := make([]float32, len(raw)/4)
	for done := 0; done < total; {
		n := min(len(part), total-done)
		if _, err := io.ReadFull(br, raw[:4*n]); err != nil {
			return fit.AutoMask{}, fmt.Errorf("%s: %w", f.Name(), err)
		}
		for i := range part[:n] {
			part[i] = math.Float32frombits(binary.LittleEndian.Uint32(raw[4*i:]))
		}
		ph.Add(part[:n])
		done += n
	}
	return ph.Mask(), nil
}
