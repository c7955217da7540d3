package dicom

import (
	"encoding/json"
	"math"
	"path/filepath"
	"runtime"
	"testing"
)

// sameBits reports whether a and b hold the same float32 bit patterns.
func sameBits(a, b []float32) (int, bool) {
	if len(a) != len(b) {
		return -1, false
	}
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return i, false
		}
	}
	return 0, true
}

// TestReaderSlabsAndWorkers: whatever the number of goroutines and the
// slice ranges, a Reader gives the samples of a whole load with one
// goroutine, bit for bit (classic files, one enhanced multi-frame file,
// and a protocol joined from seven series), and a subset of volumes is
// those volumes of the whole.
func TestReaderSlabsAndWorkers(t *testing.T) {
	readers := map[string]*Reader{}
	for _, enhanced := range []bool{false, true} {
		im := obliqueImage(7, 5, 6, 4)
		dir := filepath.Join(t.TempDir(), "series")
		if err := WriteSeries(dir, im, &WriteOptions{Enhanced: enhanced, Rand: newSeeded(3)}); err != nil {
			t.Fatal(err)
		}
		c, err := Scan([]string{dir}, nil)
		if err != nil || len(c.Series) != 1 {
			t.Fatal(err, c)
		}
		r, err := OpenSeries(c.Series[0])
		if err != nil {
			t.Fatal(err)
		}
		readers[map[bool]string{false: "classic", true: "enhanced"}[enhanced]] = r
	}
	c := scanOne(t, "protocols", nil)
	for _, p := range c.Protocols {
		if p.Varying == "InversionTime" {
			r, err := OpenProtocol(p)
			if err != nil {
				t.Fatal(err)
			}
			readers["protocol"] = r
		}
	}
	if len(readers) != 3 {
		t.Fatalf("%d readers", len(readers))
	}
	for name, r := range readers {
		r.Workers = 1
		whole, err := r.Load()
		if err != nil {
			t.Fatal(name, err)
		}
		dims := r.Dims()
		nz, nt, plane := dims[2], dims[3], dims[0]*dims[1]
		for _, workers := range []int{1, 2, 3, 8} {
			for _, slab := range []int{1, 2, nz} {
				for _, vols := range [][]int{nil, {nt - 1, 0}} {
					r.Workers = workers
					want := vols
					if want == nil {
						want = make([]int, nt)
						for i := range want {
							want[i] = i
						}
					}
					for z0 := 0; z0 < nz; z0 += slab {
						z1 := min(z0+slab, nz)
						got := make([]float32, (z1-z0)*plane*len(want))
						if err := r.ReadSlab(got, z0, z1, vols); err != nil {
							t.Fatal(name, err)
						}
						var ref []float32
						for _, v := range want {
							ref = append(ref, whole.Data[(v*nz+z0)*plane:(v*nz+z1)*plane]...)
						}
						if i, ok := sameBits(got, ref); !ok {
							t.Fatalf("%s: %d workers, slices [%d,%d) of volumes %v differ at sample %d", name, workers, z0, z1, vols, i)
						}
					}
				}
			}
		}
		// The whole load through LoadSeries/LoadProtocol is the same.
		if name == "protocol" {
			for _, p := range c.Protocols {
				if p.Varying == "InversionTime" {
					im, err := LoadProtocol(p)
					if err != nil {
						t.Fatal(err)
					}
					if _, ok := sameBits(im.Data, whole.Data); !ok || im.Dims != whole.Dims {
						t.Fatal("LoadProtocol differs from the reader")
					}
				}
			}
		}
	}
}

// TestScanWorkers: the catalog of a folder with several series, problems
// and skipped files is the same with one CPU as with several.
func TestScanWorkers(t *testing.T) {
	var want []byte
	for _, procs := range []int{1, 2, 5} {
		old := runtime.GOMAXPROCS(procs)
		c := scanOne(t, "protocols", nil)
		runtime.GOMAXPROCS(old)
		b, err := json.Marshal(c)
		if err != nil {
			t.Fatal(err)
		}
		if want == nil {
			want = b
			if len(c.Series) < 10 {
				t.Fatalf("%d series", len(c.Series))
			}
			continue
		}
		if string(b) != string(want) {
			t.Errorf("GOMAXPROCS %d: catalog differs from GOMAXPROCS 1", procs)
		}
	}
}
