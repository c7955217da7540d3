//go:build !race

package phantom

const raceEnabled = false
