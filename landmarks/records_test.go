package landmarks

import (
	"math"
	"strings"
	"testing"
)

// Table reads by the rules of every reader: BOM, CRLF, comments, quoted
// fields across lines, header names in any case; faults name file, line and
// column.
func TestTable(t *testing.T) {
	text := "\xef\xbb\xbf# made by hand\r\nID,Note,X_um\r\na,\"one\r\ntwo\",1.5\r\n\r\n# a comment\r\nb,,\r\n"
	tb, err := ParseTable("t.csv", strings.NewReader(text))
	if err != nil {
		t.Fatal(err)
	}
	if tb.Len() != 2 || tb.Column("x_UM") != 2 || tb.Column("nope") != -1 {
		t.Fatalf("%d rows, x_um at %d", tb.Len(), tb.Column("x_um"))
	}
	if got := tb.Field(0, 1); got != "one\r\ntwo" && got != "one\ntwo" {
		t.Errorf("quoted field %q", got)
	}
	if tb.Line(0, 0) != 3 || tb.Line(0, 2) != 4 || tb.Line(1, 0) != 7 {
		t.Errorf("lines %d, %d, %d; want 3, 4, 7", tb.Line(0, 0), tb.Line(0, 2), tb.Line(1, 0))
	}
	if v, ok, err := tb.Number(0, 2); v != 1.5 || !ok || err != nil {
		t.Errorf("Number = %g, %v, %v", v, ok, err)
	}
	if v, ok, err := tb.Number(1, 2); !math.IsNaN(v) || ok || err != nil {
		t.Errorf("empty Number = %g, %v, %v", v, ok, err)
	}
	if _, err := tb.Require("id", "y_um"); err == nil || err.Error() != `t.csv:2: column "y_um": missing from the header, which has ID, Note, X_um` {
		t.Errorf("Require: %v", err)
	}
	for _, tc := range []struct{ text, err string }{
		{"id,x\na,0x1p4\n", `t.csv:2: column "x": "0x1p4" is not a decimal number`},
		{"id,x\na,1_0\n", `t.csv:2: column "x": "1_0" is not a number (write digits without separators)`},
		{"id,x\na,\"1\n", `t.csv:2:`},
		{"id,x\na,1,2\n", `t.csv:2: the row has 3 fields but the header has 2 columns`},
	} {
		tb, err := ParseTable("t.csv", strings.NewReader(tc.text))
		if err == nil {
			_, _, err = tb.Number(0, 1)
		}
		if err == nil || !strings.HasPrefix(err.Error(), tc.err) {
			t.Errorf("%q: error %v, want %q", tc.text, err, tc.err)
		}
	}
}
