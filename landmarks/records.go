package landmarks

import (
	"io"
	"math"
	"strings"
)

// Table is a CSV table read whole by the rules of every table ferry reads
// (see the package documentation): one header row naming the columns, found
// in any case and order; "#" comment lines and blank lines skipped; an
// optional UTF-8 byte-order mark; LF or CRLF line ends; quoted fields; one
// number syntax (decimal, finite, digits unbroken). Every fault is an
// *InputError naming the file, the line and the column.
//
// It is for the tables ferry reads back (its own outputs, or a user's table
// of any columns); the landmark, cell and candidate readers stream their
// rows instead.
type Table struct {
	t    *table
	rows [][]string
	// lines[r] is the physical line on which row r starts; rows that span
	// lines (a quoted field holding a line break) keep the line of each
	// field in fieldLines.
	lines      []int
	fieldLines map[int][]int
}

// ReadTable reads the CSV table at path (see Table).
func ReadTable(path string) (*Table, error) {
	return parseFile(path, ParseTable)
}

// ParseTable reads a CSV table from r; name is the file named in messages.
func ParseTable(name string, r io.Reader) (*Table, error) {
	t, err := openTable(name, r)
	if err != nil {
		return nil, err
	}
	out := &Table{t: t}
	for {
		ok, err := t.nextRow()
		if err != nil {
			return nil, err
		}
		if !ok {
			break
		}
		row := append([]string(nil), t.record...)
		first, last := t.line(0), t.line(len(row)-1)
		if last != first {
			if out.fieldLines == nil {
				out.fieldLines = map[int][]int{}
			}
			fl := make([]int, len(row))
			for i := range fl {
				fl[i] = t.line(i)
			}
			out.fieldLines[len(out.rows)] = fl
		}
		out.rows = append(out.rows, row)
		out.lines = append(out.lines, first)
	}
	return out, nil
}

// Name is the file the table was read from.
func (tb *Table) Name() string { return tb.t.name }

// Header is the column names as the header row gives them, in file order.
func (tb *Table) Header() []string { return tb.t.header }

// Len is the number of data rows.
func (tb *Table) Len() int { return len(tb.rows) }

// Column is the index of the column named name (in any case), or −1.
func (tb *Table) Column(name string) int { return tb.t.column(strings.ToLower(name)) }

// Require is the indices of the named columns, or an *InputError naming
// the first one missing.
func (tb *Table) Require(names ...string) ([]int, error) {
	lower := make([]string, len(names))
	for k, n := range names {
		lower[k] = strings.ToLower(n)
	}
	return tb.t.require("", lower...)
}

// Line is the physical line of the file on which field col of row starts.
func (tb *Table) Line(row, col int) int {
	if fl, ok := tb.fieldLines[row]; ok {
		return fl[col]
	}
	return tb.lines[row]
}

// Field is field col of row with surrounding spaces trimmed.
func (tb *Table) Field(row, col int) string { return strings.TrimSpace(tb.rows[row][col]) }

// Fail is an *InputError about field col of row.
func (tb *Table) Fail(row, col int, msg string) *InputError {
	return &InputError{File: tb.t.name, Line: tb.Line(row, col), Column: tb.t.header[col], Msg: msg}
}

// Number reads field col of row as a finite decimal number. An empty field
// gives NaN and ok false; any other field that is not such a number is an
// *InputError.
func (tb *Table) Number(row, col int) (v float64, ok bool, err error) {
	s := tb.Field(row, col)
	if s == "" {
		return math.NaN(), false, nil
	}
	v, msg := parseNumber(s)
	if msg != "" {
		return 0, false, tb.Fail(row, col, msg)
	}
	return v, true, nil
}

// ReadHeader reads only the header row of the CSV table at path, by the
// rules of Table, to tell one kind of table from another without reading
// it whole.
func ReadHeader(path string) ([]string, error) {
	return parseFile(path, func(name string, r io.Reader) ([]string, error) {
		t, err := openTable(name, r)
		if err != nil {
			return nil, err
		}
		return t.header, nil
	})
}
