package dicom

import (
	"strings"
	"testing"
)

// TestCleanText: control characters, format characters and invalid UTF-8
// in a header's free text become U+FFFD, and a value longer than maxText
// characters is cut with an ellipsis; ordinary text is kept (the
// regression seed testdata/fuzz/FuzzSeries/668fcc5b43fb85d8 is a file
// whose SeriesDescription holds NULs).
func TestCleanText(t *testing.T) {
	for _, c := range []struct{ in, want string }{
		{"T2 multi-echo", "T2 multi-echo"},
		{"br\x00\x00n", "br\uFFFD\uFFFDn"},
		{"a\x1b[31mred", "a\uFFFD[31mred"},
		{"left\u202Eright", "left\uFFFDright"},
		{"bad \xff utf8", "bad \uFFFD utf8"},
		{"<script>alert(1)</script>", "<script>alert(1)</script>"}, // escaping is the report's job
		{strings.Repeat("é", maxText+5), strings.Repeat("é", maxText) + "…"},
	} {
		if got := cleanText(c.in); got != c.want {
			t.Errorf("cleanText(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}
