package fit

import (
	"errors"
	"fmt"
)

// ErrProtocol reports acquisition parameters a model cannot use: a missing
// echo time, too few volumes, repeated values.
var ErrProtocol = errors.New("protocol")

func protocolErr(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrProtocol, fmt.Sprintf(format, args...))
}

// maxSpoiledTR is the longest repetition time, in ms, tauvox accepts for
// the spoiled gradient-echo models (t1-vfa, b1-afi). Their TRs are short
// by design, a few to about 100 ms (TR ≪ T1; common practice), while a TR
// written in milliseconds where a BIDS sidecar wants seconds comes out
// 1000 times too long, 2.5 s and more: the limit sits between the two.
const maxSpoiledTR = 1000

// spoiledTRErr refuses an implausibly long repetition time of a spoiled
// gradient-echo model, naming the likely unit mistake; nil when tr is
// plausible.
func spoiledTRErr(model string, tr float64, volume int) error {
	if tr <= maxSpoiledTR {
		return nil
	}
	return protocolErr("repetition time %g ms of volume %d is implausible for %s, a spoiled gradient echo (TR of a few to about 100 ms; refused above %d ms): was %g ms meant (a sidecar time in milliseconds where BIDS wants seconds)? Give --tr in ms to override the sidecar", tr, volume, model, maxSpoiledTR, tr/1000)
}
