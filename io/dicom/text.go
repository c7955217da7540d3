package dicom

import (
	"strings"
	"unicode"
	"unicode/utf8"

	lib "github.com/suyashkumar/dicom"
	"github.com/suyashkumar/dicom/pkg/tag"
)

// maxText bounds a free-text value taken from a header, in characters.
// The VRs of the attributes read as text hold at most 64 (LO, PN
// components) or 16 (SH) characters (PS3.5 Table 6.2-1); a longer value
// comes from a malformed file and is cut, with an ellipsis.
const maxText = 256

// text returns a free-text attribute (a description, a station or
// manufacturer name) fit for records, reports and terminals: control and
// format characters, which these VRs may not hold apart from ESC for
// character-set switching (PS3.5 §6.1.2.3, Table 6.2-1), and invalid UTF-8
// become U+FFFD, and the value is cut to maxText characters. (FuzzSeries
// found NULs inside a SeriesDescription passed on to the maps' records.)
func text(elems []*lib.Element, t tag.Tag) string { return cleanText(str(elems, t)) }

func cleanText(s string) string {
	if !utf8.ValidString(s) {
		s = strings.ToValidUTF8(s, "\uFFFD")
	}
	var b strings.Builder
	n := 0
	for _, r := range s {
		if n == maxText {
			b.WriteString("…")
			break
		}
		if unicode.IsControl(r) || unicode.Is(unicode.Cf, r) {
			r = unicode.ReplacementChar
		}
		b.WriteRune(r)
		n++
	}
	return b.String()
}
