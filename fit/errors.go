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
