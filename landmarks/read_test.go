package landmarks

import (
	"crypto/sha256"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/google/go-cmp/cmp/cmpopts"

	"ferry/transform"
)

const testdata = "../testdata/landmarks"

// fileSHA256 hashes a file independently of the parser.
func fileSHA256(t *testing.T, path string) string {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return fmt.Sprintf("%x", sha256.Sum256(b))
}

func TestReadPairs3D(t *testing.T) {
	path := filepath.Join(testdata, "pairs3d.csv")
	got, err := ReadPairs(path)
	if err != nil {
		t.Fatal(err)
	}
	want := &PairSet{
		Path:         path,
		Dim:          3,
		ExtraColumns: []string{"note"},
		SHA256:       fileSHA256(t, path),
		Pairs: []Pair{
			{ID: "V1", Kind: KindVessel, Source: transform.Vec{10.5, 20, 5}, Target: transform.Vec{112.1, 215.3, 48.2}, Line: 4, Extra: []string{"branch of the penetrating arteriole"}},
			{ID: "V2", Kind: KindVessel, Source: transform.Vec{180.2, 25.4, 12.5}, Target: transform.Vec{290.7, 221.9, 60.1}, Line: 5, Extra: []string{""}},
			{ID: "S1", Kind: KindSoma, Source: transform.Vec{95, 140.2, 30}, Target: transform.Vec{201.5, 338, 81.7}, Line: 6, Extra: []string{"pyramidal, layer 2/3"}},
			{ID: "S2", Kind: KindSoma, Source: transform.Vec{20.1, 175.9, 55.5}, Target: transform.Vec{118.8, 372.4, 104.9}, Line: 8, Extra: []string{""}},
			{ID: "O1", Kind: KindOther, Source: transform.Vec{150, 160, 80.2}, Target: transform.Vec{257.3, 356.1, 130}, Line: 9, Extra: []string{"empty kind means other"}},
			{ID: "O2", Kind: KindOther, Source: transform.Vec{60, 60, 95}, Target: transform.Vec{166.2, 258.4, 144.1}, Line: 10, Extra: []string{`says "check"`}},
		},
	}
	if diff := cmp.Diff(want, got); diff != "" {
		t.Errorf("ReadPairs(%s) (-want +got):\n%s", path, diff)
	}
	if diff := cmp.Diff([]string{"V1", "V2", "S1", "S2", "O1", "O2"}, got.IDs()); diff != "" {
		t.Errorf("IDs (-want +got):\n%s", diff)
	}
	if diff := cmp.Diff([]Kind{KindVessel, KindVessel, KindSoma, KindSoma, KindOther, KindOther}, got.Kinds()); diff != "" {
		t.Errorf("Kinds (-want +got):\n%s", diff)
	}
	src, dst := got.Sources(), got.Targets()
	for i, p := range want.Pairs {
		if src[i] != p.Source || dst[i] != p.Target {
			t.Errorf("Sources/Targets[%d] = %v, %v, want %v, %v", i, src[i], dst[i], p.Source, p.Target)
		}
	}
}

func TestReadPairs2D(t *testing.T) {
	path := filepath.Join(testdata, "pairs2d.csv")
	got, err := ReadPairs(path)
	if err != nil {
		t.Fatal(err)
	}
	if got.Dim != 2 || len(got.Pairs) != 4 || len(got.ExtraColumns) != 0 {
		t.Fatalf("got Dim %d, %d pairs, extra columns %q; want 2-D, 4 pairs, none", got.Dim, len(got.Pairs), got.ExtraColumns)
	}
	// The columns are in a shuffled order in the file.
	want := Pair{ID: "B", Kind: KindVessel, Source: transform.Vec{180.2, 25.4, 0}, Target: transform.Vec{290.7, 221.9, 0}, Line: 4}
	if diff := cmp.Diff(want, got.Pairs[1]); diff != "" {
		t.Errorf("second pair (-want +got):\n%s", diff)
	}
}

func TestReadPoints(t *testing.T) {
	cellsPath := filepath.Join(testdata, "cells.csv")
	cells, err := ReadPoints(cellsPath, "cells")
	if err != nil {
		t.Fatal(err)
	}
	want := &PointSet{
		Path:         cellsPath,
		Dim:          3,
		ExtraColumns: []string{"dff_peak", "orientation_deg"},
		SHA256:       fileSHA256(t, cellsPath),
		Points: []Point{
			{ID: "c001", Pos: transform.Vec{12.5, 40, 101.2}, Line: 3, Extra: []string{"0.85", "45"}},
			{ID: "c002", Pos: transform.Vec{80.1, 35.7, 98}, Line: 4, Extra: []string{"1.20", "90"}},
			{ID: "c003", Pos: transform.Vec{140, 150.5, 120.4}, Line: 5, Extra: []string{"0.31", ""}},
			{ID: "c004", Pos: transform.Vec{60.2, 110, 140.9}, Line: 6, Extra: []string{"2.05", "135"}},
		},
	}
	if diff := cmp.Diff(want, cells); diff != "" {
		t.Errorf("ReadPoints(%s) (-want +got):\n%s", cellsPath, diff)
	}

	candPath := filepath.Join(testdata, "candidates.csv")
	cand, err := ReadPoints(candPath, "candidates")
	if err != nil {
		t.Fatal(err)
	}
	if cand.Dim != 3 || len(cand.Points) != 5 || cand.Points[4].ID != "n21" || cand.Points[4].Extra[0] != "390.4" {
		t.Errorf("candidates: Dim %d, %d points, last %+v", cand.Dim, len(cand.Points), cand.Points[len(cand.Points)-1])
	}
}

// TestBOMAndCRLF checks that a file saved with a byte-order mark and CRLF
// line ends reads as its plain LF twin, line numbers included.
func TestBOMAndCRLF(t *testing.T) {
	path := filepath.Join(testdata, "pairs_bom_crlf.csv")
	got, err := ReadPairs(path)
	if err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	plain := strings.ReplaceAll(strings.TrimPrefix(string(raw), "\uFEFF"), "\r\n", "\n")
	if plain == string(raw) {
		t.Fatal("test file has neither a byte-order mark nor CRLF line ends")
	}
	want, err := ParsePairs(path, strings.NewReader(plain))
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff(want, got, cmpopts.IgnoreFields(PairSet{}, "SHA256")); diff != "" {
		t.Errorf("BOM and CRLF (-plain +got):\n%s", diff)
	}
	if lines := []int{got.Pairs[0].Line, got.Pairs[2].Line, got.Pairs[3].Line}; !cmp.Equal(lines, []int{3, 6, 7}) {
		t.Errorf("lines %v, want [3 6 7]", lines)
	}
	if got.SHA256 != fileSHA256(t, path) || got.SHA256 == want.SHA256 {
		t.Errorf("SHA256 %s is not that of the raw file bytes", got.SHA256)
	}
}

func TestParseFormats(t *testing.T) {
	tests := []struct {
		name  string
		input string
		want  *PointSet
	}{
		{
			name:  "comments before the header, between and after rows",
			input: "# exported 2024-05-01\n#id,x\n\nid,x,y,z\n# first\na,1,2,3\n#\nb,4,5,6\n# end\n",
			want: &PointSet{Dim: 3, ExtraColumns: []string{}, Points: []Point{
				{ID: "a", Pos: transform.Vec{1, 2, 3}, Line: 6},
				{ID: "b", Pos: transform.Vec{4, 5, 6}, Line: 8},
			}},
		},
		{
			name:  "quoted fields with commas, quotes and a line break",
			input: "id,x,y,z,label,comment\n\"cell, 1\",\"1.5\",2,3,\"a,b\",\"he said \"\"no\"\"\"\nc2,4,5,6,\"two\nlines\",x\nc3,7,8,9,,\n",
			want: &PointSet{Dim: 3, ExtraColumns: []string{"label", "comment"}, Points: []Point{
				{ID: "cell, 1", Pos: transform.Vec{1.5, 2, 3}, Line: 2, Extra: []string{"a,b", `he said "no"`}},
				{ID: "c2", Pos: transform.Vec{4, 5, 6}, Line: 3, Extra: []string{"two\nlines", "x"}},
				{ID: "c3", Pos: transform.Vec{7, 8, 9}, Line: 5, Extra: []string{"", ""}},
			}},
		},
		{
			name:  "header in any case and order, spaces around names and values",
			input: " Z ,score, ID,Y,x\n 3 , 0.5 , a1 ,2, 1\n",
			want: &PointSet{Dim: 3, ExtraColumns: []string{"score"}, Points: []Point{
				{ID: "a1", Pos: transform.Vec{1, 2, 3}, Line: 2, Extra: []string{"0.5 "}},
			}},
		},
		{
			name:  "byte-order mark and CRLF",
			input: "\uFEFF# from a spreadsheet\r\nid,x,y,z,note\r\na,1,2,3,\"x\r\ny\"\r\n\r\nb,4,5,6,\r\n",
			want: &PointSet{Dim: 3, ExtraColumns: []string{"note"}, Points: []Point{
				{ID: "a", Pos: transform.Vec{1, 2, 3}, Line: 3, Extra: []string{"x\ny"}},
				{ID: "b", Pos: transform.Vec{4, 5, 6}, Line: 6, Extra: []string{""}},
			}},
		},
		{
			name:  "2-D",
			input: "id,x,y,area\np,1.25,-2,7\nq,3,4,8\n",
			want: &PointSet{Dim: 2, ExtraColumns: []string{"area"}, Points: []Point{
				{ID: "p", Pos: transform.Vec{1.25, -2, 0}, Line: 2, Extra: []string{"7"}},
				{ID: "q", Pos: transform.Vec{3, 4, 0}, Line: 3, Extra: []string{"8"}},
			}},
		},
		{
			name:  "large and small coordinates",
			input: "id,x,y,z\nfar,123456789012.5,-1e300,1.7976931348623157e308\nnear,1e-300,-0,+4.5E2\n",
			want: &PointSet{Dim: 3, ExtraColumns: []string{}, Points: []Point{
				{ID: "far", Pos: transform.Vec{123456789012.5, -1e300, 1.7976931348623157e308}, Line: 2},
				{ID: "near", Pos: transform.Vec{1e-300, 0, 450}, Line: 3},
			}},
		},
		{
			name:  "no final line end, spaces-only line",
			input: "id,x,y,z\n   \na,1,2,3",
			want: &PointSet{Dim: 3, ExtraColumns: []string{}, Points: []Point{
				{ID: "a", Pos: transform.Vec{1, 2, 3}, Line: 3},
			}},
		},
		{
			name:  "non-ASCII ids and values",
			input: "id,x,y,z,Bemerkung\nZelle-ä,1,2,3,größer\n細胞,4,5,6,✓\n",
			want: &PointSet{Dim: 3, ExtraColumns: []string{"Bemerkung"}, Points: []Point{
				{ID: "Zelle-ä", Pos: transform.Vec{1, 2, 3}, Line: 2, Extra: []string{"größer"}},
				{ID: "細胞", Pos: transform.Vec{4, 5, 6}, Line: 3, Extra: []string{"✓"}},
			}},
		},
	}
	for _, tt := range tests {
		for _, rd := range readers {
			t.Run(tt.name+"/"+rd.name, func(t *testing.T) {
				got, err := ParsePoints("t.csv", "cells", rd.wrap(strings.NewReader(tt.input)))
				if err != nil {
					t.Fatal(err)
				}
				tt.want.Path = "t.csv"
				tt.want.SHA256 = fmt.Sprintf("%x", sha256.Sum256([]byte(tt.input)))
				if diff := cmp.Diff(tt.want, got, cmpopts.EquateEmpty()); diff != "" {
					t.Errorf("(-want +got):\n%s", diff)
				}
			})
		}
	}
}

func TestKinds(t *testing.T) {
	for _, tt := range []struct {
		in   string
		want Kind
	}{
		{"vessel", KindVessel}, {"VESSEL", KindVessel}, {" Vessel ", KindVessel},
		{"soma", KindSoma}, {"Soma", KindSoma},
		{"other", KindOther}, {"OTHER", KindOther}, {"", KindOther}, {"  ", KindOther},
	} {
		set, err := ParsePairs("k.csv", strings.NewReader(pairHeader+"L1,"+tt.in+",1,2,3,4,5,6\n"))
		if err != nil {
			t.Errorf("kind %q: %v", tt.in, err)
			continue
		}
		if got := set.Pairs[0].Kind; got != tt.want {
			t.Errorf("kind %q read as %q, want %q", tt.in, got, tt.want)
		}
	}
}

func TestScaleVoxels(t *testing.T) {
	pairs, err := ParsePairs("p.csv", strings.NewReader(pairHeader+"L1,soma,10,20,30,1,2,3\nL2,soma,0,1,2,4,5,6\n"))
	if err != nil {
		t.Fatal(err)
	}
	pairs.ScaleVoxels(transform.Vec{0.5, 0.5, 2}, transform.Vec{0.004, 0.004, 0.04})
	if got, want := pairs.Pairs[0].Source, (transform.Vec{5, 10, 60}); got != want {
		t.Errorf("scaled source %v, want %v", got, want)
	}
	if got, want := pairs.Pairs[1].Target, (transform.Vec{4 * 0.004, 5 * 0.004, 6 * 0.04}); got != want {
		t.Errorf("scaled target %v, want %v", got, want)
	}

	cells, err := ParsePoints("c.csv", "cells", strings.NewReader("id,x,y\na,3,4\n"))
	if err != nil {
		t.Fatal(err)
	}
	cells.ScaleVoxels(transform.Vec{0.25, 2, 0})
	if got, want := cells.Points[0].Pos, (transform.Vec{0.75, 8, 0}); got != want {
		t.Errorf("scaled cell %v, want %v", got, want)
	}
}

func TestExclude(t *testing.T) {
	set, err := ReadPairs(filepath.Join(testdata, "pairs3d.csv"))
	if err != nil {
		t.Fatal(err)
	}
	kept, err := set.Exclude([]string{"S1", "V1"})
	if err != nil {
		t.Fatal(err)
	}
	if diff := cmp.Diff([]string{"V2", "S2", "O1", "O2"}, kept.IDs()); diff != "" {
		t.Errorf("kept ids (-want +got):\n%s", diff)
	}
	if kept.SHA256 != set.SHA256 || kept.Path != set.Path || kept.Dim != 3 || len(set.Pairs) != 6 {
		t.Errorf("Exclude changed the file facts or the original set: %+v", kept)
	}
	if same, err := set.Exclude(nil); err != nil || len(same.Pairs) != 6 {
		t.Errorf("Exclude(nil) = %v, %v", same, err)
	}
	// The library speaks of the values; the command adds the flag's name.
	want := `no landmark with id "S9" in ` + set.Path
	if _, err := set.Exclude([]string{"V1", "S9"}); err == nil || err.Error() != want || !errors.Is(err, ErrExclusion) {
		t.Errorf("Exclude unknown id: %v, want %s", err, want)
	}
	want = "excludes all 6 landmark pairs of " + set.Path
	if _, err := set.Exclude(set.IDs()); err == nil || err.Error() != want || !errors.Is(err, ErrExclusion) {
		t.Errorf("Exclude all: %v, want %s", err, want)
	}
}

// TestTestdata reads every sample file: the good ones must read, the bad
// ones must fail with the message given.
func TestTestdata(t *testing.T) {
	bad := map[string]string{
		"bad_kind.csv":           `bad_kind.csv:3: column "kind": "vesel" is not a landmark kind: want vessel, soma or other`,
		"bad_number.csv":         `bad_number.csv:4: column "z": "1.2.3" is not a number`,
		"bad_duplicate_id.csv":   `bad_duplicate_id.csv:7: column "id": id "L7" already used on line 5`,
		"bad_missing_column.csv": `bad_missing_column.csv:1: column "target_y": missing from the header, which has id, kind, source_x, source_y, source_z, target_x, target_z`,
		"bad_half_z.csv":         `bad_half_z.csv:1: column "target_z": missing while source_z is present: give both z columns for 3-D landmarks or neither for 2-D`,
		"bad_short_row.csv":      `bad_short_row.csv:3: column "z": missing: the row has 3 fields but the header has 4 columns`,
		"bad_header_only.csv":    `bad_header_only.csv: no cells: the header is not followed by any rows`,
		"bad_nul.csv":            `bad_nul.csv:3: not a text file: it holds a NUL byte (is it a CSV table?)`,
		"bad_latin1.csv":         `bad_latin1.csv:3: not UTF-8 text: invalid byte 0xE9 (save the file as UTF-8)`,
	}
	entries, err := os.ReadDir(testdata)
	if err != nil {
		t.Fatal(err)
	}
	seen := 0
	for _, e := range entries {
		name := e.Name()
		path := filepath.Join(testdata, name)
		var err error
		if strings.Contains(name, "pairs") || name == "bad_kind.csv" || name == "bad_duplicate_id.csv" || name == "bad_missing_column.csv" || name == "bad_half_z.csv" {
			_, err = ReadPairs(path)
		} else {
			_, err = ReadPoints(path, "cells")
		}
		want, isBad := bad[name]
		switch {
		case isBad && err == nil:
			t.Errorf("%s: no error, want %s", name, want)
		case isBad && err.Error() != filepath.Join(testdata, want):
			t.Errorf("%s:\n got %v\nwant %s", name, err, filepath.Join(testdata, want))
		case !isBad && err != nil:
			t.Errorf("%s: %v", name, err)
		}
		if isBad {
			seen++
		}
	}
	if seen != len(bad) {
		t.Errorf("found %d of the %d bad sample files", seen, len(bad))
	}
}

// TestLongTables reads tables long enough for the row count to be guessed
// from their first rows, with later rows longer, shorter or as long as the
// first, from memory, through a reader that cannot tell its length, and from
// a file.
func TestLongTables(t *testing.T) {
	for _, tt := range []struct {
		name        string
		first, rest string // the extra value of the first sampleRows rows and of the rest
	}{
		{"even", "abc", "abc"},
		{"longer later", "a", strings.Repeat("b", 50)},
		{"shorter later", strings.Repeat("a", 50), ""},
	} {
		const rows = 3*sampleRows + 7
		var b strings.Builder
		b.WriteString("\uFEFFid,x,y,z,note\n")
		for i := range rows {
			note := tt.rest
			if i < sampleRows {
				note = tt.first
			}
			fmt.Fprintf(&b, "c%d,%d,%d.5,-%d,%s\n", i, i, i, i, note)
		}
		input := b.String()
		path := filepath.Join(t.TempDir(), "cells.csv")
		if err := os.WriteFile(path, []byte(input), 0o644); err != nil {
			t.Fatal(err)
		}
		read := map[string]func() (*PointSet, error){
			"memory": func() (*PointSet, error) { return ParsePoints(path, "cells", strings.NewReader(input)) },
			"stream": func() (*PointSet, error) {
				return ParsePoints(path, "cells", struct{ io.Reader }{strings.NewReader(input)})
			},
			"file": func() (*PointSet, error) { return ReadPoints(path, "cells") },
		}
		for how, read := range read {
			set, err := read()
			if err != nil {
				t.Fatalf("%s, %s: %v", tt.name, how, err)
			}
			if len(set.Points) != rows {
				t.Fatalf("%s, %s: %d points, want %d", tt.name, how, len(set.Points), rows)
			}
			for i, p := range set.Points {
				want := Point{ID: fmt.Sprintf("c%d", i), Pos: transform.Vec{float64(i), float64(i) + 0.5, -float64(i)}, Line: i + 2}
				if i < sampleRows {
					want.Extra = []string{tt.first}
				} else {
					want.Extra = []string{tt.rest}
				}
				if diff := cmp.Diff(want, p); diff != "" {
					t.Fatalf("%s, %s: point %d (-want +got):\n%s", tt.name, how, i, diff)
				}
			}
			if set.SHA256 != fileSHA256(t, path) {
				t.Errorf("%s, %s: wrong SHA256", tt.name, how)
			}
		}
	}
}

// TestEstimateRows checks the guess of a table's length from its first rows:
// within the margin for even rows, none where the reader cannot tell its
// length.
func TestEstimateRows(t *testing.T) {
	const rows = 10 * sampleRows
	var b strings.Builder
	b.WriteString("\uFEFF# comment\nid,x,y,z\n")
	for i := range rows {
		fmt.Fprintf(&b, "c%05d,1.000,2.000,3.000\n", i)
	}
	for how, r := range map[string]io.Reader{
		"memory": strings.NewReader(b.String()),
		"stream": struct{ io.Reader }{strings.NewReader(b.String())},
	} {
		tab, err := openTable("t.csv", r)
		if err != nil {
			t.Fatal(err)
		}
		for range sampleRows {
			if ok, err := tab.nextRecord(); !ok || err != nil {
				t.Fatalf("%s: row missing: %v", how, err)
			}
		}
		got := tab.estimateRows(sampleRows)
		switch how {
		case "memory":
			if got < rows || got > rows+rows/16+2 {
				t.Errorf("%s: estimated %d rows, want %d to %d", how, got, rows, rows+rows/16+2)
			}
		case "stream":
			if got != 0 {
				t.Errorf("%s: estimated %d rows, want no estimate", how, got)
			}
		}
	}
}
