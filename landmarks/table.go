package landmarks

import (
	"bufio"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"strings"
)

// table reads a CSV table row by row, after its header.
//
// Most tables are plain: lines of unquoted ASCII fields. Those lines are
// split here, byte by byte, without encoding/csv; the first line that is not
// plain (a quote, a tab or other control character, a field starting with a
// non-ASCII character, a line too long for the buffer, the last line
// without its line end, a fault of the text) and everything after it goes
// to encoding/csv, which then reads exactly what it would have read from the
// start. The two paths give the same fields, lines and errors; a fuzz test
// (FuzzTableFastPath) compares them.
type table struct {
	name string
	text *textReader
	// lines feeds the plain-line path; csv is nil until a line that is not
	// plain hands the rest of the file to encoding/csv.
	lines *bufio.Reader
	csv   *csv.Reader
	// nLine and off count the lines and bytes the plain-line path has
	// consumed; once csv has taken over they are the base its line numbers
	// and offsets are counted from.
	nLine int
	off   int64
	// recLine is the line of the current row while on the plain-line path.
	recLine int
	// fields is the record of the plain-line path, reused from row to row.
	fields []string
	header []string
	// headerLine is the physical line of the header row.
	headerLine int
	// columns maps a lower-case header name to its index.
	columns map[string]int
	// record is the current row, reused from one row to the next; its
	// strings are fresh for every row and may be kept.
	record []string
	// size is the number of bytes r held when the table was opened, or -1
	// when r cannot tell; dataStart is the offset of the first byte after
	// the header.
	size, dataStart int64
}

// openTable reads up to and including the header row of r.
func openTable(name string, r io.Reader) (*table, error) {
	return openTableWith(name, r, true)
}

// openTableWith is openTable, with the plain-line path or (plain false)
// with encoding/csv from the first line, as the tests that compare the two
// paths need.
func openTableWith(name string, r io.Reader, plain bool) (*table, error) {
	size := remaining(r) // before anything is read ahead
	text, err := newTextReader(name, r)
	if err != nil {
		return nil, err
	}
	t := &table{name: name, text: text, size: size}
	if plain {
		t.lines = bufio.NewReaderSize(text, 64<<10)
	} else {
		t.csv = newCSVReader(text)
	}

	ok, err := t.nextRecord()
	if err != nil {
		return nil, err
	}
	if !ok {
		return nil, &InputError{File: name, Msg: "no header row (only comments and blank lines): want a header row naming the columns"}
	}
	t.headerLine = t.line(0)
	t.header = make([]string, len(t.record))
	t.columns = make(map[string]int, len(t.record))
	for i, raw := range t.record {
		h := strings.TrimSpace(raw)
		line := t.line(i)
		switch {
		case h == "":
			return nil, &InputError{File: name, Line: line, Msg: fmt.Sprintf("header column %d has no name: every column needs one (is there a stray comma at the end of the line?)", i+1)}
		case strings.IndexByte(h, '\r') >= 0:
			return nil, &InputError{File: name, Line: line, Msg: fmt.Sprintf("header name %s holds a carriage return (do the lines end in CR alone? use LF or CRLF)", quote(h))}
		case strings.IndexByte(h, '\n') >= 0:
			return nil, &InputError{File: name, Line: line, Msg: fmt.Sprintf("header name %s holds a line break", quote(h))}
		}
		key := strings.ToLower(h)
		if j, dup := t.columns[key]; dup {
			return nil, &InputError{File: name, Line: line, Column: h, Msg: fmt.Sprintf("named twice in the header (columns %d and %d)", j+1, i+1)}
		}
		t.columns[key] = i
		t.header[i] = h
	}
	t.dataStart = t.offset()
	return t, nil
}

// newCSVReader is the encoding/csv reader of every table, over r.
func newCSVReader(r io.Reader) *csv.Reader {
	c := csv.NewReader(r)
	c.Comment = '#'
	c.FieldsPerRecord = -1
	c.LazyQuotes = false
	c.ReuseRecord = true
	c.TrimLeadingSpace = true
	return c
}

// offset is the number of bytes after the byte-order mark read up to the
// end of the current row.
func (t *table) offset() int64 {
	if t.csv == nil {
		return t.off
	}
	return t.off + t.csv.InputOffset()
}

// remaining is the number of bytes left to read from r where r can tell
// without being read (a file, a bytes or strings reader), or -1.
func remaining(r io.Reader) int64 {
	switch v := r.(type) {
	case interface{ Len() int }:
		return int64(v.Len())
	case *os.File:
		info, err := v.Stat()
		if err != nil || !info.Mode().IsRegular() {
			return -1
		}
		pos, err := v.Seek(0, io.SeekCurrent)
		if err != nil {
			return -1
		}
		return info.Size() - pos
	}
	return -1
}

// sampleRows is how many rows are read before the number of rows in the
// whole table is estimated from their length.
const sampleRows = 256

// estimateRows guesses, after rows rows have been read, how many the table
// holds in all, so that a million-row table is stored without growing its
// slices and maps twenty times over. The guess assumes later rows as long as
// the first ones, with a margin of 1/16; 0 means no guess.
func (t *table) estimateRows(rows int) int {
	if t.size < 0 || rows == 0 {
		return 0
	}
	// The offset does not count the byte-order mark.
	off := t.offset()
	perRow := float64(off-t.dataStart) / float64(rows)
	left := float64(t.size - int64(t.text.bom) - off)
	if perRow <= 0 || left <= 0 {
		return 0
	}
	more := left / perRow
	return rows + int(more+more/16) + 1
}

// nextRecord reads the next row that is not blank into t.record and reports
// whether there was one.
func (t *table) nextRecord() (bool, error) {
	for {
		var rec []string
		var err error
		if t.csv == nil {
			rec, err = t.readPlain()
		} else {
			rec, err = t.csv.Read()
		}
		if err == io.EOF {
			return false, nil
		}
		if err != nil {
			return false, t.readError(err)
		}
		t.record = rec
		// encoding/csv skips empty lines itself; a line of spaces reaches
		// us as one empty field.
		if len(rec) == 1 && strings.TrimSpace(rec[0]) == "" {
			continue
		}
		return true, nil
	}
}

// readError turns an error of the CSV reader into an *InputError.
func (t *table) readError(err error) error {
	var in *InputError
	if errors.As(err, &in) {
		return in
	}
	var csvErr *csv.ParseError
	if errors.As(err, &csvErr) {
		// Lines count from where encoding/csv took over.
		pe := *csvErr
		pe.Line += t.nLine
		pe.StartLine += t.nLine
		msg := pe.Err.Error()
		switch {
		case errors.Is(pe.Err, csv.ErrBareQuote):
			msg = fmt.Sprintf("a quote (\") at position %d inside a field that is not quoted: quote the whole field and double any quote within it", pe.Column)
		case errors.Is(pe.Err, csv.ErrQuote) && pe.StartLine != pe.Line:
			msg = fmt.Sprintf("a quoted field that starts on line %d is not closed properly (a quote must be doubled inside quotes, and the closing quote be followed by a comma or the end of the line)", pe.StartLine)
		case errors.Is(pe.Err, csv.ErrQuote):
			msg = fmt.Sprintf("a quoted field is not closed properly at position %d (a quote must be doubled inside quotes, and the closing quote be followed by a comma or the end of the line)", pe.Column)
		}
		return &InputError{File: t.name, Line: pe.Line, Msg: msg}
	}
	return &InputError{File: t.name, Msg: "cannot read: " + ioMessage(err)}
}

// column is the index of the column named name (lower case), or -1.
func (t *table) column(name string) int {
	if i, ok := t.columns[name]; ok {
		return i
	}
	return -1
}

// require returns the indices of the named columns, or an error naming the
// first one missing. hint, when not empty, is added to that error.
func (t *table) require(hint string, names ...string) ([]int, error) {
	idx := make([]int, len(names))
	for k, name := range names {
		idx[k] = t.column(name)
		if idx[k] < 0 {
			msg := "missing from the header, which has " + headerList(t.header)
			if allNumbers(t.header) {
				msg += " (is the header row missing?)"
			} else if hint != "" {
				msg += " (" + hint + ")"
			}
			return nil, &InputError{File: t.name, Line: t.headerLine, Column: name, Msg: msg}
		}
	}
	return idx, nil
}

// extras is the indices of the columns not in used, in file order.
func (t *table) extras(used ...int) []int {
	var idx []int
	for i := range t.header {
		taken := false
		for _, u := range used {
			if u == i {
				taken = true
				break
			}
		}
		if !taken {
			idx = append(idx, i)
		}
	}
	return idx
}

// line is the physical line on which field i of the current row starts.
func (t *table) line(i int) int {
	if t.csv == nil {
		return t.recLine
	}
	line, _ := t.csv.FieldPos(i)
	return t.nLine + line
}

// fail is an *InputError about field i of the current row.
func (t *table) fail(i int, msg string) *InputError {
	return &InputError{File: t.name, Line: t.line(i), Column: t.header[i], Msg: msg}
}

// checkWidth makes sure the current row has one field per header column.
func (t *table) checkWidth() error {
	n, want := len(t.record), len(t.header)
	switch {
	case n < want:
		return &InputError{File: t.name, Line: t.line(0), Column: t.header[n],
			Msg: fmt.Sprintf("missing: the row has %d fields but the header has %d columns", n, want)}
	case n > want:
		return &InputError{File: t.name, Line: t.line(want),
			Msg: fmt.Sprintf("the row has %d fields but the header has %d columns (quote any value that holds a comma)", n, want)}
	}
	return nil
}

// id returns the trimmed id in field i of the current row, or an error when
// it is empty or was used on an earlier line (seen maps ids to lines).
func (t *table) id(i int, seen map[string]int) (string, error) {
	id := strings.TrimSpace(t.record[i])
	if id == "" {
		return "", t.fail(i, "empty id: every row needs one")
	}
	if first, dup := seen[id]; dup {
		return "", t.fail(i, fmt.Sprintf("id %s already used on line %d", quote(id), first))
	}
	return id, nil
}

// number parses field i of the current row as a finite decimal number.
func (t *table) number(i int) (float64, error) {
	v, msg := parseNumber(t.record[i])
	if msg != "" {
		return 0, t.fail(i, msg)
	}
	return v, nil
}

// regrow returns a copy of m with room for n entries.
func regrow(m map[string]int, n int) map[string]int {
	grown := make(map[string]int, n)
	for k, v := range m {
		grown[k] = v
	}
	return grown
}

// stringBlock hands out short slices of strings carved from larger blocks,
// so that the extra values of a million rows cost a few thousand
// allocations rather than a million.
type stringBlock struct {
	free []string
}

func (b *stringBlock) take(n int) []string {
	if n == 0 {
		return nil
	}
	if len(b.free) < n {
		b.free = make([]string, max(n, 1024*n))
	}
	s := b.free[:n:n]
	b.free = b.free[n:]
	return s
}

// openFile opens path for reading, or returns an *InputError saying why not.
// parseFile opens the file at path and parses it with parse, naming the
// file in parse's messages as the path given.
func parseFile[T any](path string, parse func(name string, r io.Reader) (T, error)) (T, error) {
	f, err := openFile(path)
	if err != nil {
		var zero T
		return zero, err
	}
	defer f.Close()
	return parse(path, f)
}

func openFile(path string) (*os.File, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, &InputError{File: path, Msg: "cannot open: " + ioMessage(err)}
	}
	if info, err := f.Stat(); err == nil && info.IsDir() {
		f.Close()
		return nil, &InputError{File: path, Msg: "is a folder: want a CSV file"}
	}
	return f, nil
}

// ioMessage is the reason of an I/O error without the operation and path,
// which the *InputError around it already gives.
func ioMessage(err error) string {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		return pe.Err.Error()
	}
	return err.Error()
}

// extraValues returns the row's values of the extra columns, taken from
// block. Without extra columns nothing else holds on to the row's text, so
// the id is copied instead and nil returned: the row's text can then go.
func (t *table) extraValues(block *stringBlock, extraCols []int, id *string) []string {
	if len(extraCols) == 0 {
		*id = strings.Clone(*id)
		return nil
	}
	extra := block.take(len(extraCols))
	for k, i := range extraCols {
		extra[k] = t.record[i]
	}
	return extra
}

// sized grows rows, once sampleRows of them are read, to the number the
// file's size suggests, and the id map with it.
func sized[T any](t *table, rows []T, seen map[string]int) ([]T, map[string]int) {
	if len(rows) == sampleRows {
		if n := t.estimateRows(sampleRows); n > cap(rows) {
			return append(make([]T, 0, n), rows...), regrow(seen, n)
		}
	}
	return rows, seen
}

// nextRow reads the next data row and checks that it has as many fields as
// the header; false at the end of the table.
func (t *table) nextRow() (bool, error) {
	ok, err := t.nextRecord()
	if err != nil || !ok {
		return false, err
	}
	return true, t.checkWidth()
}

// names are the header names of the columns cols, in order.
func (t *table) names(cols []int) []string {
	out := make([]string, len(cols))
	for k, i := range cols {
		out[k] = t.header[i]
	}
	return out
}
