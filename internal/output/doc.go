// Package output holds what every writer of tauvox shares: files written
// under a temporary name beside their target, synced and renamed into
// place (a reader never sees a partial file, a failed write leaves nothing
// behind), the one-line form of an error message, and the caution every
// report and provenance record carries. It imports only the standard
// library, so any package may use it.
package output
