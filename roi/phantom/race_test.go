//go:build race

package phantom

// raceEnabled: the race detector slows the painted-map identification tests
// about tenfold, so they run fewer placements under it (the full 500-per-
// layout run is TAUVOX_IDENTIFY_FULL=1).
const raceEnabled = true
