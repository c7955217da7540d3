package nifti

import (
	"encoding/binary"
	"hash/crc32"
	"math"
	"runtime"
	"sync"

	"github.com/tauvox/tauvox/internal/halves"
	"github.com/tauvox/tauvox/internal/mapped"
	"github.com/tauvox/tauvox/internal/prefault"
	"github.com/tauvox/tauvox/io/gzsplit"
)

// minSplitBytes is the smallest compressed file worth a split: below it
// the second goroutine's start costs about what it saves. (A variable for
// the tests, which use smaller files.)
var minSplitBytes int64 = 4 << 20

// split is the speculative decoding of the second half of a gzip image
// (package gzsplit) beside the ordinary decoder, a gzsplit.Head on the
// same file in memory. As soon as the end's first block is found, the
// ordinary decoder is told to stop there (Head.SetStop) unless it is past
// it already, and says which it did; the end is accepted only when the
// ordinary decoder will stop at its start. The ordinary decoder waits at
// the stop until the end is decoded (or has failed: it then goes on), and
// the caller checks the whole against the gzip CRC-32.
type split struct {
	mu      sync.Mutex
	limit   int64 // stream offset where the ordinary decoder stops: the end's first byte once accepted
	tail    *gzsplit.Tail
	crc     uint32 // CRC-32 of the whole member, from its trailer
	csBit   int64  // bit offset in all of the candidate end's first block; −1 until found
	ackBit  int64  // the candidate the ordinary decoder has seen
	honored int64  // the candidate the ordinary decoder stops at; −1: none
	closed  bool   // the read returned: nothing is accepted any more
	// Once an end is accepted, the ordinary decoder decides, when it
	// stops, whether it stopped exactly where the end begins (decided,
	// abort); only then does the end's goroutine write the destination.
	decided  bool
	abort    bool
	from     int64         // compressed offset where the search for the end starts
	finished bool          // the end's goroutine has returned
	changed  chan struct{} // closed (and replaced) when a field above changes
	all      []byte        // the whole compressed file
	mapping  *mapping      // all's mapping, released by close
	isMapped bool          // all is a mapping (not a copy): parts read may be released
	dstart   int           // offset of the member's deflate data in all
	done     chan struct{} // closed when the end is decoded or has failed
	// Once accepted, the end's goroutine converts the whole samples of
	// the end's rest (Tail.Rest) into the destination and takes its
	// CRC-32, off the ordinary decoder's path.
	restCRC  uint32
	restFrom int64 // bytes of the rest left to the caller (a partial sample)
	restUsed int64 // bytes of the rest converted
}

// startSplit starts the speculative decoding of a whole-image read whose
// samples occupy stream bytes base … base+need, or returns nil when it is
// not worth it (no second CPU, a small file, not allowed the memory).
func (r *SlabReader) startSplit(base, need int64, dst []float32) *split {
	if r.gzFile == nil || r.SplitMemory <= 0 || runtime.GOMAXPROCS(0) < 2 {
		return nil
	}
	fi, err := r.gzFile.Stat()
	if err != nil || fi.Size() < minSplitBytes {
		return nil
	}
	size := fi.Size()
	// The end starts in the middle of the compressed file. The ordinary
	// decoder's side also copies, converts and takes the peaks, but the
	// end's side then resolves, converts and checks its part; on the 47 MB
	// series of docs/benchmarks.md the middle gave the shortest read
	// (0.314 s median of six, against 0.333 s at 45 % and 0.319 s and
	// 0.333 s at 53 % and 56 %).
	from := size / 2
	// The compressed file, and the end's output (twice over in the worst
	// case: 16-bit while it holds placeholders).
	if size+2*need > r.SplitMemory {
		return nil
	}
	// Both decoders work from the file mapped into memory (mapped.File): the
	// ordinary one (gzsplit.Head, in sequential) from the start, the end's
	// from near the middle.
	all, unmap, err := mapped.File(r.gzFile, size)
	isMapped := err == nil
	if err != nil {
		// Not mapped here: read it.
		all, unmap = make([]byte, size), func() {}
		if n, _ := r.gzFile.ReadAt(all, 0); int64(n) != size {
			return nil
		}
	}
	var dstart int
	if gerr := mapped.Guard(all, func() { dstart, err = gzsplit.MemberData(all) }); gerr != nil || err != nil {
		unmap()
		return nil
	}
	sp := &split{limit: math.MaxInt64, all: all, isMapped: isMapped, dstart: dstart, done: make(chan struct{}), from: from,
		changed: make(chan struct{}), csBit: -1, ackBit: -1, honored: -1}
	// The mapping goes when the read returns (close), unless the end's
	// goroutine still reads it; then when sp goes, which that goroutine
	// holds as long as it runs.
	sp.mapping = &mapping{unmap: unmap}
	runtime.AddCleanup(sp, func(m *mapping) { m.release() }, sp.mapping)
	go func() {
		defer close(sp.done)
		defer func() {
			sp.mu.Lock()
			sp.finished = true
			sp.notify()
			sp.mu.Unlock()
		}()
		// Everything that reads the file runs under one mapped.Guard: a
		// fault on the mapping ends the search, and the ordinary decoder
		// then reads on in order and reports it.
		var t *gzsplit.Tail
		var crc uint32
		var isize int64
		if mapped.Guard(all, func() { t, crc, isize = sp.findEnd(int(need)) }) != nil || t == nil {
			return
		}
		if sp.isMapped {
			// The end is decoded: its part of the file is not read again
			// (unless the end is dropped and the ordinary decoder reads on).
			mapped.Release(all, int(from), len(all))
		}
		u := isize // the member's length, ISIZE modulo 2^32
		for u < base+need {
			u += 1 << 32
		}
		stopAt := u - int64(t.Len())
		if stopAt-base < 1<<15 || stopAt >= base+need {
			return // the window would reach into the header, or no sample is in the end
		}
		// Accept only if the ordinary decoder stops at the end's start:
		// wait until it has seen this candidate (it looks before each
		// read) or the read has returned.
		sp.mu.Lock()
		csBit := sp.csBit
		for sp.ackBit != csBit && !sp.closed {
			ch := sp.changed
			sp.mu.Unlock()
			<-ch
			sp.mu.Lock()
		}
		ok := !sp.closed && sp.honored == csBit
		if ok {
			sp.limit, sp.tail, sp.crc = stopAt, t, crc
		}
		sp.notify()
		sp.mu.Unlock()
		if !ok {
			return
		}
		// Accepted: wait for the ordinary decoder to confirm that it
		// stopped where the end begins (a damaged trailer could give
		// another stopAt); the destination beyond stopAt is then this
		// goroutine's until done is closed. Until then, when the ordinary
		// decoder is still at work, take the CRC-32 of the rest, which
		// does not depend on where it goes, and prefault where it goes:
		// on the 47 MB series the end was decoded 13–28 ms before the
		// beginning, and the work left after both fell from 29 to 19.5 ms
		// (medians of six).
		rest := t.Rest()
		sz := int64(r.Header.Datatype.Size())
		sp.mu.Lock()
		early := !sp.decided
		sp.mu.Unlock()
		if early {
			sp.restCRC = crc32.ChecksumIEEE(rest)
			// The part of the destination the rest will fill (if the
			// trailer's ISIZE is right): its pages are mapped in now,
			// not by the conversion's first writes after both halves are
			// done. Prefaulting changes no sample, so a wrong guess costs
			// only the time.
			if at := (stopAt - base + int64(t.HeadLen())) / sz; at >= 0 && at < int64(len(dst)) {
				prefault.Float32s(dst[at:])
			}
		}
		sp.mu.Lock()
		for !sp.decided {
			ch := sp.changed
			sp.mu.Unlock()
			<-ch
			sp.mu.Lock()
		}
		abort := sp.abort
		sp.mu.Unlock()
		if abort {
			return
		}
		at := stopAt - base + int64(t.HeadLen()) // sample byte where rest begins
		first := (at + sz - 1) / sz              // first whole sample in rest
		sp.restFrom = first*sz - at
		last := max(min((at+int64(len(rest)))/sz, need/sz), first)
		sp.restUsed = (last - first) * sz
		// The ordinary decoder is idle by now (paused or done): convert
		// (and take the CRC unless taken) in two halves at once.
		part := func(k0, k1 int64, b []byte) uint32 {
			if k1 > k0 {
				off := sp.restFrom + (k0-first)*sz
				convert(dst[k0:k1], rest[off:off+(k1-k0)*sz], r.Header.Datatype, r.Header.ByteOrder, r.sc)
			}
			if early {
				return 0
			}
			return crc32.ChecksumIEEE(b)
		}
		mid := first + (last-first)/2
		cut := min(sp.restFrom+(mid-first)*sz, int64(len(rest)))
		var crcA, crcB uint32
		halves.Both(func() { crcA = part(first, mid, rest[:cut]) }, func() { crcB = part(mid, last, rest[cut:]) })
		if !early {
			sp.restCRC = gzsplit.CombineCRC(crcA, crcB, int64(len(rest))-cut)
		}
	}()
	return sp
}

// findEnd finds and decodes the end of the member in sp.all from sp.from
// on, publishing each candidate's start (csBit), and returns it with the
// member's CRC-32 and ISIZE from its trailer, or a nil Tail. need is the
// expected output size (to allocate once).
func (sp *split) findEnd(need int) (*gzsplit.Tail, uint32, int64) {
	data := sp.all[sp.from:]
	// A header found may be a false positive: try a few.
	for try, at := 0, 0; try < 8; try++ {
		start, ok := gzsplit.Find(data, at, min(len(data), 8<<20))
		if !ok {
			return nil, 0, 0
		}
		sp.mu.Lock()
		sp.csBit = sp.from*8 + start
		sp.notify()
		sp.mu.Unlock()
		// A single gzip member: the stream ends with its 8-byte trailer
		// (CRC-32, ISIZE) at the end of the file.
		if t, err := gzsplit.Decode(data, start, need); err == nil && t.End == len(data)-8 {
			return t, binary.LittleEndian.Uint32(data[len(data)-8:]), int64(binary.LittleEndian.Uint32(data[len(data)-4:]))
		}
		at = int(start/8) + 1
	}
	return nil, 0, 0
}

// mapping is the compressed file's mapping, released once.
type mapping struct {
	once  sync.Once
	unmap func()
}

func (m *mapping) release() { m.once.Do(m.unmap) }

// notify wakes a paused ordinary decoder; sp.mu is held.
func (sp *split) notify() {
	close(sp.changed)
	sp.changed = make(chan struct{})
}

// limitFor returns how far (stream offset, at most end) the ordinary
// decoder may read: the end's start once an end is accepted.
func (sp *split) limitFor(end int64) int64 {
	if sp == nil {
		return end
	}
	sp.mu.Lock()
	defer sp.mu.Unlock()
	return min(sp.limit, end)
}

// before sets the stop of the ordinary decoder h before a read: at the
// candidate end's start when it has not passed it, and records that it
// has seen the candidate.
func (sp *split) before(h *gzsplit.Head) {
	sp.mu.Lock()
	defer sp.mu.Unlock()
	// Before the candidate is known, go no further than the block that
	// crosses the point where the search for it starts.
	for sp.csBit < 0 && !sp.finished && !sp.closed && h.BitPos() >= sp.from*8 {
		ch := sp.changed
		sp.mu.Unlock()
		<-ch
		sp.mu.Lock()
	}
	if sp.tail != nil {
		if sp.decided {
			h.SetStop(-1) // aborted: read on in order
		}
		return
	}
	if sp.csBit < 0 || sp.finished {
		h.SetStop(-1)
		return
	}
	if sp.ackBit != sp.csBit {
		sp.ackBit = sp.csBit
		if h.BitPos() <= sp.csBit {
			sp.honored = sp.csBit
		}
		sp.notify()
	}
	if sp.honored == sp.csBit {
		h.SetStop(sp.csBit)
	} else {
		h.SetStop(-1)
	}
}

// waitAt waits, with the ordinary decoder at its stop and pos bytes
// read, until the end is accepted or not. It reports whether the decoder
// is to stop here (the end was accepted and begins at pos).
func (sp *split) waitAt(pos int64) bool {
	sp.mu.Lock()
	defer sp.mu.Unlock()
	cs := sp.honored
	for sp.tail == nil && !sp.finished && sp.csBit == cs {
		ch := sp.changed
		sp.mu.Unlock()
		<-ch
		sp.mu.Lock()
	}
	if sp.tail != nil {
		sp.decide(pos == sp.limit)
		return !sp.abort
	}
	return false
}

// decide records, once, whether the end's goroutine may go on (the
// ordinary decoder stopped exactly where the accepted end begins); sp.mu
// is held.
func (sp *split) decide(ok bool) {
	if sp.tail == nil || sp.decided {
		return
	}
	sp.decided, sp.abort = true, !ok
	sp.notify()
}

// stopped is called when the ordinary decoder has stopped reading at
// pos: an accepted end not yet confirmed at the stop is aborted.
func (sp *split) stopped() {
	if sp == nil {
		return
	}
	sp.mu.Lock()
	defer sp.mu.Unlock()
	sp.decide(false)
}

// close ends the split for a read that returns: no end is accepted from
// now on, and one accepted before has finished writing the destination.
func (sp *split) close() {
	if sp == nil {
		return
	}
	sp.mu.Lock()
	sp.closed = true
	sp.decide(false)
	sp.notify()
	accepted := sp.tail != nil
	finished := sp.finished
	sp.mu.Unlock()
	if accepted {
		<-sp.done
		finished = true
	}
	// The ordinary decoder is done with the file: unless the end's
	// goroutine is still at work on it, give its pages back now (mapped
	// pages count in the resident size) rather than when the collector
	// finds sp.
	if finished {
		sp.mapping.release()
	}
}

// accepted reports whether an end was accepted, so that the ordinary
// decoder stopped at its start.
func (sp *split) accepted() bool {
	if sp == nil {
		return false
	}
	sp.mu.Lock()
	defer sp.mu.Unlock()
	return sp.tail != nil
}

// finishSplit completes a read whose ordinary decoder stopped at the
// decoded end's start: it fills the end's placeholders from win (the 32
// KiB before it), checks the CRC-32 of the whole member (crc so far
// covers everything before the end) against the trailer, and converts the
// end's samples. It reports false, and converts nothing, when the check
// fails (the caller then reads the end in order).
func (r *SlabReader) finishSplit(c *converter, sp *split, crc uint32, win []byte, end int64) bool {
	<-sp.done // the rest converted, its CRC taken
	if sp.abort {
		return false
	}
	t := sp.tail
	if len(win) != 1<<15 {
		return false
	}
	head, rest, err := t.Resolve(win)
	if err != nil {
		return false
	}
	crc = crc32.Update(crc, crc32.IEEETable, head)
	if gzsplit.CombineCRC(crc, sp.restCRC, int64(len(rest))) != sp.crc {
		return false
	}
	// Head, then the partial sample at the start of the rest, then the
	// converted part, then nothing (bytes past the samples).
	left := end - sp.limit // sample bytes in the end
	h := min(int64(len(head)), left)
	c.add(head[:h])
	left -= h
	if left > 0 {
		p := min(sp.restFrom, left, int64(len(rest)))
		c.add(rest[:p])
		c.skip(sp.restUsed)
	}
	r.split = true
	sp.mu.Lock()
	sp.tail = nil
	sp.mu.Unlock()
	return true
}
