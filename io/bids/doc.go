// Package bids finds the relaxometry series of a BIDS dataset and names the
// maps made from them as a BIDS derivative dataset.
//
// # Raw data
//
// Scan walks sub-<label>/[ses-<label>/]<datatype>/ of a dataset root (one
// that holds dataset_description.json) and collects the NIfTI files whose
// suffix is one of those asked for (MESE, MEGRE, IRT1, VFA by default). A
// quantitative-MRI file collection (BIDS appendix "file collections",
// check-values §3.6) stores each echo, inversion or flip angle as its own
// 3-D file, linked by an index entity (echo-, inv-, flip-); files that
// differ only in those entities form one Collection, ordered by index. The
// indices are indices, not values: the echo times, inversion times and flip
// angles come from each file's sidecar. Of a part- entity only part-mag (or
// no part) is used; phase, real and imaginary parts are left out with a note.
// A collection may also be one 4-D file whose sidecar lists a value per
// volume.
//
// Sidecars follow the BIDS inheritance principle: a JSON file of the same
// suffix at the dataset, subject, session or datatype level whose entities
// are a subset of the image's applies to it; deeper levels (and, within a
// level, files with more entities) override keys of shallower ones.
//
// Collection.Load reads the files of a collection into one 4-D
// *volume.Image (times in ms, as everywhere in tauvox) and returns every file
// it read, for provenance.
//
// # Derivatives
//
// DerivativeName names an output map from the entities of its source (the
// index and part entities dropped) and the output stem tauvox uses in a fit
// folder; WriteDescription writes dataset_description.json with DatasetType
// "derivative". The naming rule is documented in docs/formats.md.
//
// Errors name the file and the problem on one line.
package bids
