package landmarks

import (
	"encoding/csv"
	"errors"
	"fmt"
	"math"
	"strings"

	"ferry/transform"
)

// The range of every per-axis value (a voxel size, a standard deviation), in
// micrometres: from a picometre, a hundred times finer than any microscope
// resolves, to a metre, beyond any specimen. Outside it a value is a slip,
// and one such as 1e300 or 5e-324 overflowed or vanished in the arithmetic
// later, where the message then blamed a column of the cells file.
const (
	MinPerAxisUM = 1e-6
	MaxPerAxisUM = 1e6
)

// ParseTriple reads the value of a per-axis flag such as
// "--source-voxel 0.5,0.5,2" or "--cell-sd 1,1,3": dim comma-separated
// numbers (X,Y,Z in 3-D; X,Y in 2-D, where the Z of the result is left
// zero), each from MinPerAxisUM to MaxPerAxisUM micrometres. flagName, with
// its dashes, starts every message.
func ParseTriple(flagName, value string, dim int) (transform.Vec, error) {
	return parseTriple(flagName, value, dim, true)
}

// ParsePosition reads a position flag such as "--target-offset
// 100,-20.5,0": dim comma-separated finite numbers in micrometres, of any
// sign. Messages start with flagName.
func ParsePosition(flagName, value string, dim int) (transform.Vec, error) {
	return parseTriple(flagName, value, dim, false)
}

func parseTriple(flagName, value string, dim int, positive bool) (transform.Vec, error) {
	var v transform.Vec
	axes := "X,Y,Z"
	switch dim {
	case 2:
		axes = "X,Y"
	case 3:
	default:
		return v, fmt.Errorf("%s: dimension %d: want 2 or 3", flagName, dim)
	}
	kind := "positive numbers"
	if !positive {
		kind = "numbers"
	}
	fail := func(why string) error {
		return fmt.Errorf("%s: want %d %s %s in micrometres, got %s (%s)", flagName, dim, kind, axes, quote(value), why)
	}
	parts := strings.Split(value, ",")
	if len(parts) != dim {
		n := len(parts)
		if strings.TrimSpace(value) == "" {
			n = 0
		}
		return v, fail(fmt.Sprintf("%d %s", n, plural(n, "number", "numbers")))
	}
	for a, part := range parts {
		x, msg := parseNumber(part)
		if msg != "" {
			return v, fail(axes[2*a:2*a+1] + ": " + msg)
		}
		if positive && !(x > 0) {
			return v, fail(axes[2*a:2*a+1] + " is not positive")
		}
		// Sizes and spreads have a plausible range; a position (an offset
		// of a stack in its frame) may be zero or negative.
		if positive && (x < MinPerAxisUM || x > MaxPerAxisUM) {
			return v, fail(fmt.Sprintf("%s is %g, outside %g to %g µm", axes[2*a:2*a+1], x, MinPerAxisUM, MaxPerAxisUM))
		}
		if !positive && math.Abs(x) > MaxPerAxisUM {
			return v, fail(fmt.Sprintf("%s is %g, beyond ±%g µm", axes[2*a:2*a+1], x, MaxPerAxisUM))
		}
		v[a] = x
	}
	return v, nil
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// ParseIDList reads the value of a flag such as "--exclude L3,L7": ids
// separated by commas, each trimmed of spaces. An id that itself holds a
// comma can be given in double quotes, as in a CSV file. An empty value is an
// empty list; an empty item, or an id given twice, is an error naming the
// flag.
func ParseIDList(flagName, value string) ([]string, error) {
	if strings.TrimSpace(value) == "" {
		return nil, nil
	}
	r := csv.NewReader(strings.NewReader(value))
	r.TrimLeadingSpace = true
	r.FieldsPerRecord = -1
	ids, err := r.Read()
	if err == nil {
		if _, more := r.Read(); more == nil {
			err = fmt.Errorf("the list holds a line break")
		}
	}
	if err != nil {
		if pe, ok := err.(*csv.ParseError); ok {
			err = pe.Err
		}
		return nil, fmt.Errorf("%s: cannot read the id list %s: %v", flagName, quote(value), err)
	}
	seen := make(map[string]bool, len(ids))
	for i, id := range ids {
		id = strings.TrimSpace(id)
		switch {
		case id == "":
			return nil, fmt.Errorf("%s: empty id (item %d) in %s", flagName, i+1, quote(value))
		case seen[id]:
			return nil, fmt.Errorf("%s: id %s given twice", flagName, quote(id))
		}
		seen[id] = true
		ids[i] = id
	}
	return ids, nil
}

// ParseNumbers reads n comma-separated finite numbers of any sign, such as
// "--bounds -10,0,5,300,400,200" or "--source-origin 12,-4,0" (micrometres).
// flagName, with its dashes, starts every message.
func ParseNumbers(flagName, value string, n int, names string) ([]float64, error) {
	fail := func(why string) error {
		return fmt.Errorf("%s: want %d numbers %s in micrometres, got %s (%s)", flagName, n, names, quote(value), why)
	}
	parts := strings.Split(value, ",")
	if len(parts) != n {
		got := len(parts)
		if strings.TrimSpace(value) == "" {
			got = 0
		}
		return nil, fail(fmt.Sprintf("%d %s", got, plural(got, "number", "numbers")))
	}
	out := make([]float64, n)
	for a, part := range parts {
		x, msg := parseNumber(part)
		if msg != "" {
			return nil, fail(fmt.Sprintf("number %d: %s", a+1, msg))
		}
		out[a] = x
	}
	return out, nil
}

// ParseDecimal reads a number as the tables' numbers are read: a finite
// decimal number, digits without separators, a point as the decimal mark,
// no hexadecimal. The message of its error says why s is not one.
func ParseDecimal(s string) (float64, error) {
	v, msg := parseNumber(s)
	if msg != "" {
		return 0, errors.New(msg)
	}
	return v, nil
}
