package landmarks

import (
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"

	"ferry/transform"
)

func TestParseTriple(t *testing.T) {
	tests := []struct {
		flag, value string
		dim         int
		want        transform.Vec
		err         string
	}{
		{flag: "--source-voxel", value: "0.5,0.5,2", dim: 3, want: transform.Vec{0.5, 0.5, 2}},
		{flag: "--cell-sd", value: " 1, 1 ,3e0 ", dim: 3, want: transform.Vec{1, 1, 3}},
		{flag: "--cell-sd", value: "1.5,2", dim: 2, want: transform.Vec{1.5, 2, 0}},
		{flag: "--source-voxel", value: "0.5,0", dim: 3,
			err: `--source-voxel: want 3 positive numbers X,Y,Z in micrometres, got "0.5,0" (2 numbers)`},
		{flag: "--source-voxel", value: "0.5,0,1", dim: 3,
			err: `--source-voxel: want 3 positive numbers X,Y,Z in micrometres, got "0.5,0,1" (Y is not positive)`},
		{flag: "--target-sd", value: "1,1,-2", dim: 3,
			err: `--target-sd: want 3 positive numbers X,Y,Z in micrometres, got "1,1,-2" (Z is not positive)`},
		{flag: "--target-sd", value: "a,1,2", dim: 3,
			err: `--target-sd: want 3 positive numbers X,Y,Z in micrometres, got "a,1,2" (X: "a" is not a number)`},
		{flag: "--target-sd", value: "1,inf,2", dim: 3,
			err: `--target-sd: want 3 positive numbers X,Y,Z in micrometres, got "1,inf,2" (Y: "inf" is infinite: want a finite number)`},
		{flag: "--target-sd", value: "1,NaN,2", dim: 3,
			err: `--target-sd: want 3 positive numbers X,Y,Z in micrometres, got "1,NaN,2" (Y: "NaN" is not a number: want a finite number)`},
		{flag: "--cell-sd", value: "1,1,1", dim: 2,
			err: `--cell-sd: want 2 positive numbers X,Y in micrometres, got "1,1,1" (3 numbers)`},
		{flag: "--cell-sd", value: "", dim: 2,
			err: `--cell-sd: want 2 positive numbers X,Y in micrometres, got "" (0 numbers)`},
		{flag: "--cell-sd", value: "1,,1", dim: 3,
			err: `--cell-sd: want 3 positive numbers X,Y,Z in micrometres, got "1,,1" (Y: empty: want a number)`},
		{flag: "--cell-sd", value: "1", dim: 3,
			err: `--cell-sd: want 3 positive numbers X,Y,Z in micrometres, got "1" (1 number)`},
		{flag: "--cell-sd", value: "1,1,1", dim: 4, err: `--cell-sd: dimension 4: want 2 or 3`},
	}
	for _, tt := range tests {
		got, err := ParseTriple(tt.flag, tt.value, tt.dim)
		switch {
		case tt.err == "" && err != nil:
			t.Errorf("ParseTriple(%q, %q, %d): %v", tt.flag, tt.value, tt.dim, err)
		case tt.err != "" && (err == nil || err.Error() != tt.err):
			t.Errorf("ParseTriple(%q, %q, %d) error\n got %v\nwant %s", tt.flag, tt.value, tt.dim, err, tt.err)
		case tt.err == "" && got != tt.want:
			t.Errorf("ParseTriple(%q, %q, %d) = %v, want %v", tt.flag, tt.value, tt.dim, got, tt.want)
		}
	}
}

func TestParseIDList(t *testing.T) {
	tests := []struct {
		value string
		want  []string
		err   string
	}{
		{value: "A,B", want: []string{"A", "B"}},
		{value: " L3 , L7", want: []string{"L3", "L7"}},
		{value: "solo", want: []string{"solo"}},
		{value: `"a,b",c`, want: []string{"a,b", "c"}},
		{value: "", want: nil},
		{value: "  ", want: nil},
		{value: "A,,B", err: `--exclude: empty id (item 2) in "A,,B"`},
		{value: "A,", err: `--exclude: empty id (item 2) in "A,"`},
		{value: "A,B,A", err: `--exclude: id "A" given twice`},
		{value: `"A`, err: `--exclude: cannot read the id list "\"A": extraneous or missing " in quoted-field`},
		{value: "A\nB,C", err: `--exclude: cannot read the id list "A\nB,C": the list holds a line break`},
		{value: "A\nB", err: `--exclude: cannot read the id list "A\nB": the list holds a line break`},
	}
	for _, tt := range tests {
		got, err := ParseIDList("--exclude", tt.value)
		switch {
		case tt.err == "" && err != nil:
			t.Errorf("ParseIDList(%q): %v", tt.value, err)
		case tt.err != "" && (err == nil || err.Error() != tt.err):
			t.Errorf("ParseIDList(%q) error\n got %v\nwant %s", tt.value, err, tt.err)
		case tt.err == "":
			if diff := cmp.Diff(tt.want, got); diff != "" {
				t.Errorf("ParseIDList(%q) (-want +got):\n%s", tt.value, diff)
			}
		}
	}
}

func TestParsePosition(t *testing.T) {
	v, err := ParsePosition("--target-offset", "100,-20.5,0", 3)
	if err != nil || v != (transform.Vec{100, -20.5, 0}) {
		t.Errorf("got %v, %v", v, err)
	}
	for _, bad := range []string{"1,2", "1,x,3", "1,2,inf"} {
		if _, err := ParsePosition("--target-offset", bad, 3); err == nil || !strings.HasPrefix(err.Error(), "--target-offset: want 3 numbers") {
			t.Errorf("%q: %v", bad, err)
		}
	}
}
