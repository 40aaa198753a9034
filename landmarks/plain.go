package landmarks

import (
	"bytes"
	"io"
	"strings"
)

// readPlain reads the next record on the plain-line path, skipping comment
// and empty lines as encoding/csv does, or hands over to encoding/csv at the
// first line that is not plain and returns what it reads.
func (t *table) readPlain() ([]string, error) {
	for {
		line, err := t.lines.ReadSlice('\n')
		if err != nil {
			return t.handOver(line)
		}
		// encoding/csv turns a CRLF line end into LF, then skips lines
		// that start with the comment character or hold nothing else.
		n := len(line) - 1
		if n > 0 && line[n-1] == '\r' {
			n--
		}
		body := line[:n]
		if n == 0 || body[0] == '#' {
			t.nLine++
			t.off += int64(len(line))
			continue
		}
		if !plainLine(body) {
			return t.handOver(line)
		}
		t.nLine++
		t.off += int64(len(line))
		t.recLine = t.nLine
		t.fields = splitPlain(t.fields[:0], string(body))
		return t.fields, nil
	}
}

// plainLine reports whether encoding/csv, with leading spaces trimmed and
// lazy quotes off, splits body (a line without its line end) at its commas
// and trims only ASCII spaces from the start of each field: no quote and no
// control character anywhere, and no field whose first character after its
// spaces is outside ASCII (it might be a Unicode space).
func plainLine(body []byte) bool {
	start := true // at the start of a field, past its spaces
	for _, c := range body {
		switch {
		case c == '"' || c < 0x20 || c == 0x7f:
			return false
		case c >= 0x80:
			if start {
				return false
			}
		case c == ',':
			start = true
			continue
		case c == ' ':
			continue
		}
		start = false
	}
	return true
}

// splitPlain appends to dst the fields of s, a plain line (see plainLine),
// each without its leading spaces, as slices of s.
func splitPlain(dst []string, s string) []string {
	for {
		i := strings.IndexByte(s, ',')
		field := s
		if i >= 0 {
			field = s[:i]
		}
		k := 0
		for k < len(field) && field[k] == ' ' {
			k++
		}
		dst = append(dst, field[k:])
		if i < 0 {
			return dst
		}
		s = s[i+1:]
	}
}

// handOver gives the rest of the file, starting with line (the bytes of the
// current line already taken from t.lines), to encoding/csv, and returns
// its first record.
func (t *table) handOver(line []byte) ([]string, error) {
	rest := io.MultiReader(bytes.NewReader(bytes.Clone(line)), t.lines)
	t.csv = newCSVReader(rest)
	return t.csv.Read()
}
