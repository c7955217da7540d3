package sidecar

import (
	"bytes"
	"math"
	"strconv"
)

// TidyDigits is the number of significant digits Tidy keeps.
const TidyDigits = 12

// Tidy rewrites the numbers of the JSON document b (as encoding/json
// writes it) that carry more than TidyDigits significant digits to the
// shortest form of their value rounded to TidyDigits digits, so binary
// rounding residue such as 7.699999999999999 or 700.0000000000001 reads
// 7.7 and 700. Strings are left as they are; a number that does not parse
// is copied unchanged. Twelve digits keep far more than any measured
// quantity here holds (maps are float32, about 7 digits).
func Tidy(b []byte) []byte {
	var out bytes.Buffer
	out.Grow(len(b))
	inStr, esc := false, false
	for i := 0; i < len(b); i++ {
		c := b[i]
		if inStr {
			out.WriteByte(c)
			switch {
			case esc:
				esc = false
			case c == '\\':
				esc = true
			case c == '"':
				inStr = false
			}
			continue
		}
		if c == '"' {
			inStr = true
			out.WriteByte(c)
			continue
		}
		if c == '-' || c >= '0' && c <= '9' {
			j := i
			for j < len(b) && bytes.IndexByte([]byte("+-.eE0123456789"), b[j]) >= 0 {
				j++
			}
			out.Write(tidyNumber(b[i:j]))
			i = j - 1
			continue
		}
		out.WriteByte(c)
	}
	return out.Bytes()
}

func tidyNumber(n []byte) []byte {
	digits := 0
	for _, c := range n {
		if c == 'e' || c == 'E' {
			break
		}
		if c >= '0' && c <= '9' {
			digits++
		}
	}
	if digits <= TidyDigits {
		return n
	}
	v, err := strconv.ParseFloat(string(n), 64)
	if err != nil {
		return n
	}
	r, err := strconv.ParseFloat(strconv.FormatFloat(v, 'g', TidyDigits, 64), 64)
	if err != nil {
		return n
	}
	if a := math.Abs(r); a != 0 && a < 1e-4 {
		return []byte(strconv.FormatFloat(r, 'g', -1, 64))
	}
	return []byte(strconv.FormatFloat(r, 'f', -1, 64))
}
