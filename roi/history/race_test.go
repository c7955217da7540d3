//go:build race

package history

// raceEnabled: the race detector slows the false-alarm simulation about
// tenfold; it runs on one goroutine, so `make test` covers it.
const raceEnabled = true
