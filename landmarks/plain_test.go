package landmarks

import (
	"bytes"
	"math"
	"reflect"
	"strings"
	"testing"
)

// comparePaths reads data as a table on the plain-line path and on
// encoding/csv alone, and fails unless both give the same header, records,
// lines, offsets, numbers, errors and SHA-256.
func comparePaths(t *testing.T, data []byte) {
	t.Helper()
	fast, errFast := openTableWith("f.csv", bytes.NewReader(data), true)
	slow, errSlow := openTableWith("f.csv", bytes.NewReader(data), false)
	if !reflect.DeepEqual(errFast, errSlow) {
		t.Fatalf("opening: plain-line path %v, encoding/csv %v", errFast, errSlow)
	}
	if errSlow != nil {
		return
	}
	if !reflect.DeepEqual(fast.header, slow.header) || fast.headerLine != slow.headerLine ||
		!reflect.DeepEqual(fast.columns, slow.columns) || fast.dataStart != slow.dataStart {
		t.Fatalf("header: plain-line path %q on line %d at %d, encoding/csv %q on line %d at %d",
			fast.header, fast.headerLine, fast.dataStart, slow.header, slow.headerLine, slow.dataStart)
	}
	compareNumbers(t, fast.header)
	for row := 0; ; row++ {
		okFast, errFast := fast.nextRecord()
		okSlow, errSlow := slow.nextRecord()
		if okFast != okSlow || !reflect.DeepEqual(errFast, errSlow) {
			t.Fatalf("row %d: plain-line path %v %v, encoding/csv %v %v", row, okFast, errFast, okSlow, errSlow)
		}
		if !okSlow {
			break
		}
		if !reflect.DeepEqual(fast.record, slow.record) {
			t.Fatalf("row %d: plain-line path %q, encoding/csv %q", row, fast.record, slow.record)
		}
		for i := range slow.record {
			if a, b := fast.line(i), slow.line(i); a != b {
				t.Fatalf("row %d field %d: plain-line path line %d, encoding/csv line %d", row, i, a, b)
			}
		}
		if a, b := fast.offset(), slow.offset(); a != b {
			t.Fatalf("row %d: plain-line path offset %d, encoding/csv %d", row, a, b)
		}
		if a, b := fast.estimateRows(row+1), slow.estimateRows(row+1); a != b {
			t.Fatalf("row %d: plain-line path estimates %d rows, encoding/csv %d", row, a, b)
		}
		fastWidth, slowWidth := fast.checkWidth(), slow.checkWidth()
		if !reflect.DeepEqual(fastWidth, slowWidth) {
			t.Fatalf("row %d: plain-line path %v, encoding/csv %v", row, fastWidth, slowWidth)
		}
		compareNumbers(t, slow.record)
	}
	if a, b := fast.text.SHA256(), slow.text.SHA256(); a != b {
		t.Fatalf("SHA-256: plain-line path %s, encoding/csv %s", a, b)
	}
}

// compareNumbers fails unless parseNumber and parseNumberStrconv read every
// field the same, to the bit.
func compareNumbers(t *testing.T, fields []string) {
	t.Helper()
	for _, s := range fields {
		v, msg := parseNumber(s)
		w, want := parseNumberStrconv(s)
		if math.Float64bits(v) != math.Float64bits(w) || msg != want {
			t.Fatalf("%q: parseNumber %v %q, parseNumberStrconv %v %q", s, v, msg, w, want)
		}
	}
}

func TestPlainPathMatchesCSV(t *testing.T) {
	long := "id,x,y\n" + "a," + strings.Repeat("1", 70_000) + ",2\n"
	for _, data := range []string{
		"id,x,y\na,1,2\n",
		"\uFEFFid,x,y\r\na,1,2\r\n",
		"# c\n\nid, x ,y\n  \n#x\na,  1.5,-2\n\r\nb,3,4",
		"id,x,y\na,1,2\nb,\"3\",4\nc,5,6\n",
		"id,x,y\na,1,2\nb,\"3\n\",4\nc,5,6\n",
		"id,x,y\na,1,2\nb,3\"x,4\nc,5,6\n",
		"id,x,y\na,1,2\nb,\"3\"x,4\nc,5,6\n",
		"id,x,y\na,1,2\nb,\"3\n\n\"x,4\nc,5,6\n",
		"id,x,y\na,1,2\r",
		"id,x,y\na,1,2\r\r\n",
		"id,x,y\na,1\r2,3\n",
		"id,x,y\na,\t1,2\n",
		"id,x,y\nä,\u00a01,2\n",
		"id,x,y\nä,1,\u20002\n",
		"id,x,y\na,1,2\nb,3,4\xff\n",
		"id,x,y\na,1,2\nb,3,4\x00\n",
		"id,x,y\na,1,2\nb,3,\xe2\x82",
		"id,x,y\na,1,2,\nb,3\n",
		"id,x,y\n,,\n   \na,0x1p4,1_0\nb,NaN,Inf\nc,1e400,-0\nd,1.2.3,1,5\n",
		"id,x,y\na,0.1,123456789012345\nb,1234567890123456,.5\nc,5.,+.25\nd,-,+\ne,.,-0.000000000000001\nf,9.007199254740993,0.30000000000000004\n",
		long,
		"id,x,y\na," + strings.Repeat("9", 5000) + ",2\n",
	} {
		comparePaths(t, []byte(data))
	}
	comparePaths(t, cellsTable(3000))
	comparePaths(t, candidatesTable(3000))
}

// FuzzTableFastPath compares the plain-line path of the table reader, and
// the short-decimal path of the number reader, with encoding/csv and
// strconv alone on arbitrary input: every field, line, number and error
// must be the same.
func FuzzTableFastPath(f *testing.F) {
	addSamples(f)
	for _, s := range []string{"id,x,y\na,1,2\nb,\"3\n\",4\n", "id,x\n a , 1.25 \r\n#c\n\n", "id,x\nä,\u00a01\n"} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		comparePaths(t, data)
	})
}

// FuzzParseNumber compares parseNumber with parseNumberStrconv on
// arbitrary text.
func FuzzParseNumber(f *testing.F) {
	for _, s := range []string{"1", "-0", "+.5", "5.", "0.1", "123456789012345", "1234567890123456", "1e5", "9.007199254740993", "0.30000000000000004", "8.98846567431158e307", "0x1p4", "NaN", " 1", "1_0", "-", "."} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		compareNumbers(t, []string{s})
	})
}
