package output

import (
	"math"
	"strconv"
	"strings"
	"unicode"
)

// Line returns s fit for one line of a message: when s holds a control
// character (a newline in a file name, a terminal escape) it is escaped
// as in a Go string literal, without the quotes; otherwise s is returned
// as it is.
func Line(s string) string {
	for _, r := range s {
		if r < 0x20 || r == 0x7f {
			q := strconv.Quote(s)
			return q[1 : len(q)-1]
		}
	}
	return s
}

// Caution is the statement every report and provenance record carries.
const Caution = "tauvox is a quality-assurance and research tool, not a medical device; clinical decisions follow local regulations and licensed practice."

// Message returns an error message on one line: every run of white space
// (a message wrapped over lines) becomes one space, and any other control
// character is escaped as by Line.
func Message(s string) string { return Line(strings.Join(strings.Fields(s), " ")) }

// Num formats v with prec decimals for a table cell or a CSV field; a
// value that is not finite (NaN: not measured) gives "".
func Num(v float64, prec int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'f', prec, 64)
}

// Printable replaces control and format characters (a terminal escape
// sequence in a series description, say) and invalid UTF-8 with U+FFFD.
func Printable(s string) string {
	return strings.Map(func(r rune) rune {
		if unicode.IsControl(r) || unicode.Is(unicode.Cf, r) {
			return unicode.ReplacementChar
		}
		return r
	}, strings.ToValidUTF8(s, "\uFFFD"))
}

// Cell is text from a file made fit for one terminal line or table cell:
// Message, then Printable, so that no escape sequence in a file (a phantom
// name, a scanner name) reaches the terminal.
func Cell(s string) string { return Printable(Message(s)) }
