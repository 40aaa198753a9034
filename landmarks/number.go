package landmarks

import (
	"errors"
	"math"
	"strconv"
	"strings"
)

// parseNumber reads s, trimmed of spaces, as a finite decimal number, and
// otherwise returns a message saying why it is not one.
func parseNumber(s string) (float64, string) {
	if v, ok := shortDecimal(s); ok {
		return v, ""
	}
	return parseNumberStrconv(s)
}

// shortDecimal reads s when it is a decimal number of the commonest kind: an
// optional sign, then at most 15 digits with at most one point among or
// around them, nothing else. Its digits then make an integer m < 10^15 and
// its value is m / 10^k with both exactly representable, so the one
// correctly rounded division gives the float64 nearest the decimal, as
// strconv.ParseFloat does (it takes the same exact path, W. D. Clinger,
// "How to read floating point numbers accurately", PLDI 1990). ok is false
// for anything else, which parseNumberStrconv reads.
func shortDecimal(s string) (v float64, ok bool) {
	i := 0
	if len(s) > 0 && (s[0] == '-' || s[0] == '+') {
		i = 1
	}
	var m uint64
	digits, frac, point := 0, 0, false
	for ; i < len(s); i++ {
		c := s[i]
		switch {
		case c >= '0' && c <= '9':
			m = 10*m + uint64(c-'0')
			digits++
			if point {
				frac++
			}
		case c == '.' && !point:
			point = true
		default:
			return 0, false
		}
	}
	if digits == 0 || digits > 15 {
		return 0, false
	}
	// 10^frac ≤ 10^15 < 2^53: every product is exact.
	p := 1.0
	for range frac {
		p *= 10
	}
	v = float64(m) / p
	if s[0] == '-' {
		v = -v
	}
	return v, true
}

// parseNumberStrconv is parseNumber by strconv.ParseFloat, for every number
// shortDecimal does not read and every text that is not a number.
func parseNumberStrconv(s string) (float64, string) {
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, "empty: want a number"
	}
	if strings.IndexByte(s, '_') >= 0 {
		// strconv reads Go's digit separators (1_234.5); no CSV writer
		// makes them, and the commas and spaces other programs group
		// digits with are refused too: one rule, digits unbroken.
		return 0, quote(s) + " is not a number (write digits without separators)"
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		if errors.Is(err, strconv.ErrRange) {
			return 0, quote(s) + " is out of range for a number"
		}
		if strings.ContainsAny(s, ", ") && strings.IndexByte(s, '.') >= 0 || strings.IndexByte(s, ' ') >= 0 {
			return 0, quote(s) + " is not a number (write digits without separators)"
		}
		if strings.IndexByte(s, ',') >= 0 {
			return 0, quote(s) + " is not a number (use a point as the decimal mark)"
		}
		return 0, quote(s) + " is not a number"
	}
	switch {
	case math.IsNaN(v):
		return 0, quote(s) + " is not a number: want a finite number"
	case math.IsInf(v, 0):
		return 0, quote(s) + " is infinite: want a finite number"
	case isHex(s):
		// strconv also reads hexadecimal floats such as 0x1p4, which no
		// one writes in a table of micrometres on purpose.
		return 0, quote(s) + " is not a decimal number"
	}
	return v, ""
}

// isHex reports whether s, a number strconv has read, is written in
// hexadecimal: with a 0x prefix after an optional sign.
func isHex(s string) bool {
	if s[0] == '+' || s[0] == '-' {
		s = s[1:]
	}
	return len(s) > 1 && s[0] == '0' && (s[1] == 'x' || s[1] == 'X')
}

// allNumbers reports whether every name reads as a number, as it does when
// the first data row was taken for the header.
func allNumbers(names []string) bool {
	for _, s := range names {
		if _, msg := parseNumber(s); msg != "" {
			return false
		}
	}
	return len(names) > 0
}
