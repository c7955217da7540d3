package dicom

import (
	"math"
	"os"
	"path/filepath"
	"runtime"
	"testing"

	"github.com/tauvox/tauvox/volume"
)

// sinkCatalog keeps benchmark results alive.
var sinkCatalog *Catalog

// benchSeries writes nz slices × nt echoes of a 64×64 multi-echo series
// with WriteSeries into dir.
func benchSeries(b *testing.B, dir string, nz, nt int) {
	b.Helper()
	im := volume.New(64, 64, nz, nt)
	im.Affine = volume.Affine{{-0.9, 0, 0, 30}, {0, -0.9, 0, 30}, {0, 0, 2, -120}, {0, 0, 0, 1}}
	im.Acq = make([]volume.Acquisition, nt)
	for t := range im.Acq {
		im.Acq[t] = volume.Acquisition{EchoTime: 10 * float64(t+1), InversionTime: math.NaN(), RepetitionTime: 3000, FlipAngle: 90}
		v := im.Volume(t)
		for i := range v {
			v[i] = float32(1000 * math.Exp(-im.Acq[t].EchoTime/(40+float64(i%64))))
		}
	}
	if err := WriteSeries(dir, im, &WriteOptions{Rand: newSeeded(9)}); err != nil {
		b.Fatal(err)
	}
}

// BenchmarkScan2000 scans the headers of 2,000 files (125 slices × 16
// echoes, 64×64, written by WriteSeries). It reports the time and the
// bytes allocated per file.
func BenchmarkScan2000(b *testing.B) {
	dir := filepath.Join(b.TempDir(), "series")
	benchSeries(b, dir, 125, 16)
	files, _ := os.ReadDir(dir)
	n := len(files)
	b.ReportAllocs()
	var ms0, ms1 runtime.MemStats
	runtime.ReadMemStats(&ms0)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c, err := Scan([]string{dir}, nil)
		if err != nil || len(c.Series) != 1 || c.Series[0].Files != n {
			b.Fatal(err, c)
		}
		sinkCatalog = c
	}
	b.StopTimer()
	runtime.ReadMemStats(&ms1)
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*n), "ns/file")
	b.ReportMetric(float64(ms1.TotalAlloc-ms0.TotalAlloc)/float64(b.N*n), "B/file")
	runtime.GC()
	var ms2 runtime.MemStats
	runtime.ReadMemStats(&ms2)
	b.ReportMetric(float64(ms2.HeapInuse)/float64(n), "heapB/file")
}

// BenchmarkLoad2000 loads the pixel data of the same series.
func BenchmarkLoad2000(b *testing.B) {
	dir := filepath.Join(b.TempDir(), "series")
	benchSeries(b, dir, 125, 16)
	c, err := Scan([]string{dir}, nil)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		im, err := LoadSeries(c.Series[0])
		if err != nil {
			b.Fatal(err)
		}
		_ = im
	}
}

// BenchmarkScan20000 scans the headers of 20,000 files (1250 slices × 16
// echoes, 64×64, written by WriteSeries) on every CPU, warm cache (the
// first scan before the timer reads them into the page cache). The folder
// is generated into TAUVOX_SCAN_DIR when that is set (and kept, so that
// repeated runs skip the 20,000 writes), else into a temporary folder.
func BenchmarkScan20000(b *testing.B) {
	dir := os.Getenv("TAUVOX_SCAN_DIR")
	if dir == "" {
		dir = filepath.Join(b.TempDir(), "series")
	}
	if files, _ := os.ReadDir(dir); len(files) != 20000 {
		os.RemoveAll(dir)
		benchSeries(b, dir, 1250, 16)
	}
	if _, err := Scan([]string{dir}, nil); err != nil { // warm the cache
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		c, err := Scan([]string{dir}, nil)
		if err != nil || len(c.Series) != 1 || c.Series[0].Files != 20000 {
			b.Fatal(err, c)
		}
		sinkCatalog = c
	}
	b.StopTimer()
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/scan")
}
