package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"ferry/register"
)

// readSuggestions reads a suggestions table, header row first, and the
// provenance line of its sidecar.
func readSuggestions(t *testing.T, path string) (string, []string, [][]string) {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(strings.NewReader(string(data))).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	side, err := register.ReadSidecar(path, data)
	if err != nil {
		t.Fatal(err)
	}
	return side.Provenance, rows[0], rows[1:]
}

func column(t *testing.T, header []string, name string) int {
	t.Helper()
	for i, h := range header {
		if h == name {
			return i
		}
	}
	t.Fatalf("no column %q in %v", name, header)
	return -1
}

// landmarkCSV2D is a 2-D landmark file of n pairs over a 300 µm square.
func landmarkCSV2D(n int) string {
	var b strings.Builder
	b.WriteString("id,kind,source_x,source_y,target_x,target_y\n")
	for i := range n {
		x := 300 * frac(float64(i)*0.618034+0.1)
		y := 300 * frac(float64(i)*0.414214+0.3)
		fmt.Fprintf(&b, "L%d,vessel,%.3f,%.3f,%.3f,%.3f\n", i+1, x, y,
			0.95*x+0.1*y+40+3*math.Sin(y/60)+0.4*math.Sin(float64(7*i)), -0.1*x+0.97*y-20+0.4*math.Sin(float64(11*i)))
	}
	return b.String()
}

func TestSuggestCommand(t *testing.T) {
	f := newFixture(t)
	where := writeFile(t, filepath.Join(f.dir, "branches.csv"), "id,x,y,z,seen\nb1,150,150,150,day1\nb2,60,250,90,day1\nb3,250,40,260,day2\nb4,280,280,280,day2\n")
	dir2 := t.TempDir()
	lm2 := writeFile(t, filepath.Join(dir2, "landmarks.csv"), landmarkCSV2D(30))
	cells2 := writeFile(t, filepath.Join(dir2, "cells.csv"), "id,x,y\nc1,20,30\nc2,150,150\nc3,290,10\nc4,100,280\nc5,200,220\n")
	for _, tc := range []struct {
		name   string
		args   []string
		rows   int
		header string
	}{
		{"grid", []string{"suggest", f.landmarks, f.cells, "--n", "4", "--cell-sd", "0.8,0.8,3"}, 4,
			"rank,x,y,z,target_x,target_y,target_z,r95_after_um,gain_um,mean_r95_after_um,target_r95_um,target_sd_x_um,target_sd_y_um,target_sd_z_um,status,source_x_um,source_y_um,source_z_um,target_x_um,target_y_um,target_z_um"},
		{"where", []string{"suggest", f.landmarks, f.cells, "--where", where, "--n", "2", "--model", "affine"}, 2,
			"rank,x,y,z,target_x,target_y,target_z,r95_after_um,gain_um,mean_r95_after_um,target_r95_um,target_sd_x_um,target_sd_y_um,target_sd_z_um,status,source_x_um,source_y_um,source_z_um,target_x_um,target_y_um,target_z_um,where_id,seen"},
		{"2-D", []string{"suggest", lm2, cells2, "--n", "3"}, 3,
			"rank,x,y,target_x,target_y,r95_after_um,gain_um,mean_r95_after_um,target_r95_um,target_sd_x_um,target_sd_y_um,status,source_x_um,source_y_um,target_x_um,target_y_um"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "next.csv")
			o := mustSucceed(t, append(tc.args, "-o", out, "--json")...)
			prov, header, rows := readSuggestions(t, out)
			if !strings.HasPrefix(prov, "ferry ") || !strings.Contains(prov, "suggest") {
				t.Errorf("sidecar provenance %q does not name the command", prov)
			}
			if got := strings.Join(header, ","); got != tc.header {
				t.Errorf("header\n%s\nwant\n%s", got, tc.header)
			}
			// Under the error model a candidate that would not lower the
			// cells' median r95 is not suggested, so there may be fewer
			// rows than asked for, never none here.
			if len(rows) < 1 || len(rows) > tc.rows {
				t.Fatalf("%d rows, want 1 to %d", len(rows), tc.rows)
			}
			var js struct {
				R95Before   float64          `json:"r95_before_um"`
				Suggestions []map[string]any `json:"suggestions"`
			}
			if err := json.Unmarshal([]byte(o.stdout), &js); err != nil {
				t.Fatalf("stdout is not one JSON object: %v\n%s", err, o.stdout)
			}
			if len(js.Suggestions) != len(rows) {
				t.Fatalf("JSON has %d suggestions, the table %d", len(js.Suggestions), len(rows))
			}
			after := column(t, header, "r95_after_um")
			prev := js.R95Before
			for i, row := range rows {
				if row[0] != strconv.Itoa(i+1) {
					t.Errorf("row %d has rank %s", i+1, row[0])
				}
				r, err := strconv.ParseFloat(row[after], 64)
				if err != nil {
					t.Fatal(err)
				}
				if r > prev+1e-4 {
					t.Errorf("rank %d: r95_after_um %.4f rose from %.4f", i+1, r, prev)
				}
				if js.Suggestions[i]["r95_after_um"].(float64) != r {
					t.Errorf("rank %d: JSON %v, table %v", i+1, js.Suggestions[i]["r95_after_um"], r)
				}
				prev = r
			}
			if tc.name == "where" {
				id := rows[0][column(t, header, "where_id")]
				if !strings.HasPrefix(id, "b") {
					t.Errorf("where_id %q is not one of the file's", id)
				}
			}
		})
	}
}

func TestSuggestCommandRefuses(t *testing.T) {
	f := newFixture(t)
	bad := writeFile(t, filepath.Join(f.dir, "bad.csv"), "id,x,y,z\nb1,1,2,oops\n")
	flat := writeFile(t, filepath.Join(f.dir, "flat.csv"), "id,x,y\nb1,1,2\n")
	out := filepath.Join(f.dir, "next.csv")
	for _, tc := range []struct {
		name string
		args []string
		want string
	}{
		{"no output", []string{"suggest", f.landmarks, f.cells}, "-o"},
		{"over an input", []string{"suggest", f.landmarks, f.cells, "-o", f.cells}, "input"},
		{"over the where file", []string{"suggest", f.landmarks, f.cells, "--where", bad, "-o", bad}, "input"},
		{"no landmarks", []string{"suggest", f.landmarks, f.cells, "--n", "0", "-o", out}, "--n"},
		{"bad where file", []string{"suggest", f.landmarks, f.cells, "--where", bad, "-o", out}, "bad.csv:2"},
		{"2-D where for 3-D", []string{"suggest", f.landmarks, f.cells, "--where", flat, "-o", out}, "flat.csv"},
		{"bad cell sd", []string{"suggest", f.landmarks, f.cells, "--cell-sd", "1,2", "-o", out}, "--cell-sd"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			o := ferry(t, tc.args...)
			if o.code != exitError || !strings.Contains(o.stderr, tc.want) {
				t.Fatalf("want exit 1 naming %q: %v", tc.want, o)
			}
			if _, err := os.Stat(out); err == nil {
				t.Fatal("an output was written")
			}
		})
	}
}

// The suggestions are the same bytes on one core and on several: the
// search splits its work between cores, never a sum.
func TestSuggestSameAcrossCores(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the program")
	}
	bin := ferryBinary(t)
	f := newFixture(t)
	var first []byte
	for _, procs := range []string{"1", "2", "3"} {
		dir := t.TempDir()
		cmd := exec.Command(bin, "suggest", f.landmarks, f.cells, "--n", "6", "--cell-sd", "0.8,0.8,3", "-o", "next.csv")
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), "GOMAXPROCS="+procs)
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("GOMAXPROCS=%s: %v\n%s", procs, err, out)
		}
		data, err := os.ReadFile(filepath.Join(dir, "next.csv"))
		if err != nil {
			t.Fatal(err)
		}
		if first == nil {
			first = data
		} else if !bytes.Equal(first, data) {
			t.Fatalf("GOMAXPROCS=%s gave different suggestions:\n%s\nagainst\n%s", procs, data, first)
		}
	}
}
