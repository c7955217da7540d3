// Package gzruns writes gzip members (RFC 1952) tuned for the samples of
// parameter maps: long runs of one repeated sample (the background
// outside the mask, NaN or 0) and, between them, numbers whose low bytes
// are close to noise.
//
// A general LZ77 compressor spends most of its time searching for
// matches in such numbers and finds few: at gzip's fastest level a
// 1.57 M-voxel float32 map of a fit shrinks to 57 % of its bytes, about
// all of it from the background runs, and its foreground bytes to about
// 90 %. gzruns looks for one kind of match only, a run of a repeated
// 4-byte word (a back-reference at distance 4, RFC 1951 §3.2.5), and
// codes every other byte as a literal with a Huffman code built for its
// block (a dynamic block, RFC 1951 §3.2.7). On such maps the files are
// about the size of gzip's fastest level for about 60 % of its CPU time
// (BenchmarkWriteMap).
// Any gzip reader reads them.
//
// Writer is the only type: NewWriter, Write, Close, as compress/gzip's
// writer (no header fields, no flush). It allocates its buffers once;
// Write codes its input at once, in blocks of up to 1 MiB, and keeps no
// reference to it.
package gzruns
