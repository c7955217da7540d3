package dicom

import "strings"

// DefaultNameLength is the length SafeName cuts to when max is 0.
const DefaultNameLength = 64

// SafeName turns a string taken from a file (a series description, a
// station name) into something that can be part of a file name on every
// common file system: letters, digits, '-', '_', '.' and '+' are kept,
// every other run of characters (path separators, spaces, control
// characters, non-ASCII) becomes one '_', leading and trailing '.', '_'
// and '-' are dropped (so no "..", no hidden file, no option-like name),
// and the result is cut to max bytes (DefaultNameLength if max <= 0). An
// empty result becomes "unnamed".
func SafeName(s string, max int) string {
	if max <= 0 {
		max = DefaultNameLength
	}
	var b strings.Builder
	under := false
	for _, r := range s {
		ok := r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '_' || r == '+' || r == '.'
		if !ok {
			if !under {
				b.WriteByte('_')
				under = true
			}
			continue
		}
		if r == '.' && strings.HasSuffix(b.String(), ".") {
			continue // no ".."
		}
		b.WriteRune(r)
		under = r == '_'
	}
	out := strings.Trim(b.String(), "._-")
	if len(out) > max {
		out = strings.Trim(out[:max], "._-")
	}
	if out == "" {
		return "unnamed"
	}
	return out
}
