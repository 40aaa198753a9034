package landmarks

import (
	"errors"
	"io"
	"strings"
	"testing"
	"testing/iotest"
)

const pairHeader = "id,kind,source_x,source_y,source_z,target_x,target_y,target_z\n"

// parseAs reads input as the table kind names ("pairs", "cells" or
// "candidates"), through the reader wrap makes of it.
func parseAs(kind, name, input string, wrap func(io.Reader) io.Reader) error {
	r := wrap(strings.NewReader(input))
	if kind == "pairs" {
		_, err := ParsePairs(name, r)
		return err
	}
	_, err := ParsePoints(name, kind, r)
	return err
}

// readers are the ways a test feeds a table to a parser: whole, a byte at a
// time (so that every multi-byte character and CRLF straddles two reads) and
// in halves.
var readers = []struct {
	name string
	wrap func(io.Reader) io.Reader
}{
	{"whole", func(r io.Reader) io.Reader { return r }},
	{"one byte", iotest.OneByteReader},
	{"half", iotest.HalfReader},
}

func TestParseErrors(t *testing.T) {
	tests := []struct {
		name   string
		kind   string // pairs, cells or candidates
		file   string
		input  string
		want   string // the whole message
		line   int
		column string
	}{
		{
			name: "empty file", kind: "pairs", file: "pairs.csv", input: "",
			want: "pairs.csv: empty file: want a CSV table with a header row naming the columns",
		},
		{
			name: "byte-order mark only", kind: "cells", file: "cells.csv", input: "\uFEFF",
			want: "cells.csv: empty file (nothing but a byte-order mark): want a CSV table with a header row naming the columns",
		},
		{
			name: "comments only", kind: "cells", file: "cells.csv", input: "# no header here\n\n   \n# nor here\n",
			want: "cells.csv: no header row (only comments and blank lines): want a header row naming the columns",
		},
		{
			name: "NUL byte", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,1,2,3\n# fine\nc2,1\x00,2,3\n",
			want: "cells.csv:4: not a text file: it holds a NUL byte (is it a CSV table?)", line: 4,
		},
		{
			name: "NUL byte in a comment", kind: "cells", file: "cells.csv", input: "# \x00\nid,x,y,z\nc1,1,2,3\n",
			want: "cells.csv:1: not a text file: it holds a NUL byte (is it a CSV table?)", line: 1,
		},
		{
			name: "Latin-1 text", kind: "cells", file: "cells.csv", input: "id,x,y,z,note\nc1,1,2,3,ok\r\nc2,4,5,6,caf\xe9\n",
			want: "cells.csv:3: not UTF-8 text: invalid byte 0xE9 (save the file as UTF-8)", line: 3,
		},
		{
			name: "truncated character at the end", kind: "cells", file: "cells.csv", input: "id,x,y,z,note\nc1,1,2,3,\xe2\x82",
			want: "cells.csv:2: not UTF-8 text: invalid byte 0xE2 (save the file as UTF-8)", line: 2,
		},
		{
			name: "broken character", kind: "cells", file: "cells.csv", input: "id,x,y,z,note\nc1,1,2,3,\xe2\x82\n",
			want: "cells.csv:2: not UTF-8 text: invalid byte 0xE2 (save the file as UTF-8)", line: 2,
		},
		{
			name: "UTF-16", kind: "pairs", file: "pairs.csv", input: "\xff\xfei\x00d\x00",
			want: "pairs.csv:1: not UTF-8 text: the file is UTF-16 (it starts with a UTF-16 byte-order mark); save it as UTF-8", line: 1,
		},
		{
			name: "missing column", kind: "pairs", file: "pairs.csv", input: "# picked 3 May\nid,kind,source_x,source_y,source_z,target_x,target_z\nL1,vessel,1,2,3,4,5\n",
			want: `pairs.csv:2: column "target_y": missing from the header, which has id, kind, source_x, source_y, source_z, target_x, target_z`, line: 2, column: "target_y",
		},
		{
			name: "missing kind", kind: "pairs", file: "pairs.csv", input: "id,source_x,source_y,target_x,target_y\nL1,1,2,3,4\n",
			want: `pairs.csv:1: column "kind": missing from the header, which has id, source_x, source_y, target_x, target_y`, line: 1, column: "kind",
		},
		{
			name: "cells given as pairs", kind: "pairs", file: "cells.csv", input: "id,x,y,z\nc1,1,2,3\n",
			want: `cells.csv:1: column "kind": missing from the header, which has id, x, y, z (this looks like a cells or candidates table, not landmark pairs)`, line: 1, column: "kind",
		},
		{
			name: "pairs given as cells", kind: "cells", file: "pairs.csv", input: pairHeader + "L1,vessel,1,2,3,4,5,6\n",
			want: `pairs.csv:1: column "x": missing from the header, which has id, kind, source_x, source_y, source_z, target_x, target_y, target_z (this looks like a landmark pairs table, not cells)`, line: 1, column: "x",
		},
		{
			name: "no header row", kind: "candidates", file: "em.csv", input: "1,2.5,3,4\n2,5,6,7\n",
			want: `em.csv:1: column "id": missing from the header, which has 1, 2.5, 3, 4 (is the header row missing?)`, line: 1, column: "id",
		},
		{
			name: "source_z without target_z", kind: "pairs", file: "pairs.csv", input: "id,kind,source_x,source_y,source_z,target_x,target_y\nL1,vessel,1,2,3,4,5\n",
			want: `pairs.csv:1: column "target_z": missing while source_z is present: give both z columns for 3-D landmarks or neither for 2-D`, line: 1, column: "target_z",
		},
		{
			name: "target_z without source_z", kind: "pairs", file: "pairs.csv", input: "id,kind,source_x,source_y,target_x,target_y,Target_Z\nL1,vessel,1,2,3,4,5\n",
			want: `pairs.csv:1: column "source_z": missing while Target_Z is present: give both z columns for 3-D landmarks or neither for 2-D`, line: 1, column: "source_z",
		},
		{
			name: "duplicate header name", kind: "cells", file: "cells.csv", input: "id,x,y,z,X\nc1,1,2,3,4\n",
			want: `cells.csv:1: column "X": named twice in the header (columns 2 and 5)`, line: 1, column: "X",
		},
		{
			name: "duplicate extra header name", kind: "cells", file: "cells.csv", input: "#\nid,x,y,z,area, Area \nc1,1,2,3,4,5\n",
			want: `cells.csv:2: column "Area": named twice in the header (columns 5 and 6)`, line: 2, column: "Area",
		},
		{
			name: "empty header name", kind: "cells", file: "cells.csv", input: "id,x,y,z,\nc1,1,2,3,\n",
			want: `cells.csv:1: header column 5 has no name: every column needs one (is there a stray comma at the end of the line?)`, line: 1,
		},
		{
			name: "CR line ends", kind: "cells", file: "cells.csv", input: "id,x,y,z\rc1,1,2,3\r",
			want: `cells.csv:1: header name "z\rc1" holds a carriage return (do the lines end in CR alone? use LF or CRLF)`, line: 1,
		},
		{
			name: "line break in a header name", kind: "cells", file: "cells.csv", input: "#\nid,x,y,z,\"a\nb\"\nc1,1,2,3,4\n",
			want: `cells.csv:2: header name "a\nb" holds a line break`, line: 2,
		},
		{
			name: "not a number", kind: "cells", file: "cells.csv", input: "id,x,y,z\n# header above\nc1,1,2,3\n\nc2,4,5,6\nc3,7,8,9\n\n\n\n\n\n\n\nc4,1,1,1.2.3\n",
			want: `cells.csv:14: column "z": "1.2.3" is not a number`, line: 14, column: "z",
		},
		{
			name: "decimal comma", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,\"1,5\",2,3\n",
			want: `cells.csv:2: column "x": "1,5" is not a number (use a point as the decimal mark)`, line: 2, column: "x",
		},
		{
			// One rule for digit separators (issue 16): none. Go's
			// underscores were read as 1234.5 while commas and spaces
			// were refused.
			name: "underscore digit separator", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,1_234.5,2,3\n",
			want: `cells.csv:2: column "x": "1_234.5" is not a number (write digits without separators)`, line: 2, column: "x",
		},
		{
			name: "comma digit separator", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,\"1,234.5\",2,3\n",
			want: `cells.csv:2: column "x": "1,234.5" is not a number (write digits without separators)`, line: 2, column: "x",
		},
		{
			name: "space digit separator", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,1 234.5,2,3\n",
			want: `cells.csv:2: column "x": "1 234.5" is not a number (write digits without separators)`, line: 2, column: "x",
		},
		{
			name: "NaN", kind: "pairs", file: "pairs.csv", input: pairHeader + "L1,vessel,1,2,3,4,NaN,6\n",
			want: `pairs.csv:2: column "target_y": "NaN" is not a number: want a finite number`, line: 2, column: "target_y",
		},
		{
			name: "infinity", kind: "pairs", file: "pairs.csv", input: pairHeader + "L1,vessel,1,2,+Inf,4,5,6\n",
			want: `pairs.csv:2: column "source_z": "+Inf" is infinite: want a finite number`, line: 2, column: "source_z",
		},
		{
			name: "minus infinity", kind: "candidates", file: "em.csv", input: "id,x,y,z\nn1,-inf,2,3\n",
			want: `em.csv:2: column "x": "-inf" is infinite: want a finite number`, line: 2, column: "x",
		},
		{
			name: "out of range", kind: "candidates", file: "em.csv", input: "id,x,y,z\nn1,1,1e400,3\n",
			want: `em.csv:2: column "y": "1e400" is out of range for a number`, line: 2, column: "y",
		},
		{
			name: "hexadecimal", kind: "candidates", file: "em.csv", input: "id,x,y,z\nn1,1,0x1p4,3\n",
			want: `em.csv:2: column "y": "0x1p4" is not a decimal number`, line: 2, column: "y",
		},
		{
			name: "empty coordinate", kind: "pairs", file: "pairs.csv", input: pairHeader + "L1,vessel,1,2,3,4,5, \n",
			want: `pairs.csv:2: column "target_z": empty: want a number`, line: 2, column: "target_z",
		},
		{
			name: "short row", kind: "cells", file: "cells.csv", input: "id,x,y,z,dff\nc1,1,2,3,0.5\nc2,1,2\n",
			want: `cells.csv:3: column "z": missing: the row has 3 fields but the header has 5 columns`, line: 3, column: "z",
		},
		{
			name: "long row", kind: "cells", file: "cells.csv", input: "id,x,y,z\r\nc1,1,2,3\r\nc2,1,2,3,4\r\n",
			want: `cells.csv:3: the row has 5 fields but the header has 4 columns (quote any value that holds a comma)`, line: 3,
		},
		{
			name: "duplicate id", kind: "pairs", file: "pairs.csv", input: pairHeader + "L5,vessel,1,2,3,4,5,6\n# again\nL6,soma,1,2,3,4,5,6\nL7,soma,1,2,3,4,5,6\nL7,soma,1,2,3,4,5,6\n",
			want: `pairs.csv:6: column "id": id "L7" already used on line 5`, line: 6, column: "id",
		},
		{
			name: "duplicate id after trimming", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,1,2,3\n\" c1 \",4,5,6\n",
			want: `cells.csv:3: column "id": id "c1" already used on line 2`, line: 3, column: "id",
		},
		{
			name: "empty id", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,1,2,3\n,4,5,6\n",
			want: `cells.csv:3: column "id": empty id: every row needs one`, line: 3, column: "id",
		},
		{
			name: "bad kind", kind: "pairs", file: "pairs.csv", input: pairHeader + "L1,Vesel,1,2,3,4,5,6\n",
			want: `pairs.csv:2: column "kind": "Vesel" is not a landmark kind: want vessel, soma or other`, line: 2, column: "kind",
		},
		{
			name: "header and no rows", kind: "cells", file: "cells.csv", input: "id,x,y,z\n# none yet\n\n",
			want: `cells.csv: no cells: the header is not followed by any rows`,
		},
		{
			name: "pairs header and no rows", kind: "pairs", file: "pairs.csv", input: pairHeader,
			want: `pairs.csv: no landmark pairs: the header is not followed by any rows`,
		},
		{
			name: "bare quote", kind: "cells", file: "cells.csv", input: "id,x,y,z,note\nc1,1,2,3,a \"b\"\n",
			want: `cells.csv:2: a quote (") at position 12 inside a field that is not quoted: quote the whole field and double any quote within it`, line: 2,
		},
		{
			name: "quote not closed", kind: "cells", file: "cells.csv", input: "id,x,y,z,note\nc1,1,2,3,\"a\"b\n",
			want: `cells.csv:2: a quoted field is not closed properly at position 12 (a quote must be doubled inside quotes, and the closing quote be followed by a comma or the end of the line)`, line: 2,
		},
		{
			name: "quote never closed", kind: "cells", file: "cells.csv", input: "id,x,y,z,note\nc1,1,2,3,\"ab\nc2,4,5,6,cd\n",
			want: `cells.csv:3: a quoted field that starts on line 2 is not closed properly (a quote must be doubled inside quotes, and the closing quote be followed by a comma or the end of the line)`, line: 3,
		},
		{
			name: "line numbers after a field on two lines", kind: "cells", file: "cells.csv", input: "id,x,y,z,note\nc1,1,2,3,\"two\nlines\"\nc2,4,5,x,n\n",
			want: `cells.csv:4: column "z": "x" is not a number`, line: 4, column: "z",
		},
		{
			name: "long value is shortened", kind: "cells", file: "cells.csv", input: "id,x,y,z\nc1,1,2," + strings.Repeat("9", 30) + strings.Repeat("x", 30) + "\n",
			want: `cells.csv:2: column "z": "` + strings.Repeat("9", 30) + strings.Repeat("x", 10) + `"... is not a number`, line: 2, column: "z",
		},
	}
	for _, tt := range tests {
		for _, rd := range readers {
			t.Run(tt.name+"/"+rd.name, func(t *testing.T) {
				err := parseAs(tt.kind, tt.file, tt.input, rd.wrap)
				if err == nil {
					t.Fatalf("no error, want %s", tt.want)
				}
				var in *InputError
				if !errors.As(err, &in) {
					t.Fatalf("error %T %v, want an *InputError", err, err)
				}
				if got := err.Error(); got != tt.want {
					t.Errorf("error\n got %s\nwant %s", got, tt.want)
				}
				if in.File != tt.file || in.Line != tt.line || in.Column != tt.column {
					t.Errorf("error at file %q line %d column %q, want %q %d %q", in.File, in.Line, in.Column, tt.file, tt.line, tt.column)
				}
				if strings.ContainsAny(err.Error(), "\n") {
					t.Errorf("message spans lines: %q", err.Error())
				}
			})
		}
	}
}

func TestReadErrors(t *testing.T) {
	dir := t.TempDir()
	missing := dir + "/missing.csv"
	if _, err := ReadPairs(missing); err == nil || err.Error() != missing+": cannot open: no such file or directory" {
		t.Errorf("ReadPairs(missing) = %v", err)
	}
	if _, err := ReadPoints(dir, "cells"); err == nil || err.Error() != dir+": is a folder: want a CSV file" {
		t.Errorf("ReadPoints(folder) = %v", err)
	}
	var in *InputError
	_, err := ReadPoints(missing, "cells")
	if !errors.As(err, &in) || in.Line != 0 || in.File != missing {
		t.Errorf("ReadPoints(missing) = %#v, want an *InputError for the file without a line", err)
	}
	_, err = ParsePoints("cells.csv", "cells", iotest.ErrReader(errors.New("device gone")))
	if err == nil || err.Error() != "cells.csv: cannot read: device gone" {
		t.Errorf("ParsePoints(failing reader) = %v", err)
	}
	_, err = ParsePoints("cells.csv", "cells", io.MultiReader(strings.NewReader("id,x,y,z\nc1,1,2,3\n"), iotest.ErrReader(errors.New("device gone"))))
	if err == nil || err.Error() != "cells.csv: cannot read: device gone" {
		t.Errorf("ParsePoints(reader failing after the header) = %v", err)
	}
}

func TestInputErrorFormat(t *testing.T) {
	tests := []struct {
		err  InputError
		want string
	}{
		{InputError{File: "a.csv", Line: 3, Column: "x", Msg: "bad"}, `a.csv:3: column "x": bad`},
		{InputError{File: "a.csv", Line: 3, Msg: "bad"}, `a.csv:3: bad`},
		{InputError{File: "a.csv", Column: "x", Msg: "bad"}, `a.csv: column "x": bad`},
		{InputError{File: "a.csv", Msg: "bad"}, `a.csv: bad`},
		{InputError{Line: 3, Msg: "bad"}, `line 3: bad`},
		{InputError{Msg: "bad"}, `bad`},
	}
	for _, tt := range tests {
		if got := tt.err.Error(); got != tt.want {
			t.Errorf("%#v.Error() = %q, want %q", tt.err, got, tt.want)
		}
	}
}
