// Package prefault maps in, ahead of use, the pages of memory that is
// about to be written, with one system call instead of a page fault per
// 4 KiB page at the first write.
//
// On Linux 5.14 and later, madvise(MADV_POPULATE_WRITE) maps in a whole
// range at once, as if every page had been written, without writing it
// (madvise(2)). Elsewhere, and where the kernel refuses it, Float32s does
// nothing and the first writes map the pages in as usual. The contents
// never change, so a range may be prefaulted while it is being written.
//
// It pays where a goroutine would otherwise wait: the end of a split
// .nii.gz read is decoded before the beginning, and prefaulting the part
// of the samples it will fill, while it waits, took 10 ms off the work
// left after both (io/nifti, split.go).
package prefault
