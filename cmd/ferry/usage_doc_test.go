package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The walk-through of docs/usage.md runs line by line on simulate's output,
// every command succeeding (check ends with exit 3: it flags the two
// landmarks the simulator spoiled, as the page says), and leaves the files
// the page names.
func TestUsageWalkThrough(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the whole job on the default scenario")
	}
	page, err := os.ReadFile(filepath.Join("..", "..", "docs", "usage.md"))
	if err != nil {
		t.Fatal(err)
	}
	const heading = "## Try it on `ferry simulate`'s output"
	_, section, ok := strings.Cut(string(page), heading)
	if !ok {
		t.Fatalf("docs/usage.md has no section %q", heading)
	}
	section, _, _ = strings.Cut(section, "\n## ")
	var lines []string
	pending := ""
	for _, l := range strings.Split(section, "\n") {
		if !strings.HasPrefix(l, "    ") {
			continue
		}
		l = pending + strings.TrimSpace(l)
		if strings.HasSuffix(l, `\`) {
			pending = strings.TrimSuffix(l, `\`)
			continue
		}
		pending = ""
		lines = append(lines, l)
	}
	if len(lines) < 8 {
		t.Fatalf("the walk-through has %d command lines: %q", len(lines), lines)
	}
	t.Chdir(t.TempDir())
	for _, l := range lines {
		args := strings.Fields(l)
		if args[0] != "ferry" {
			t.Fatalf("line %q does not run ferry", l)
		}
		o := ferry(t, args[1:]...)
		want := exitOK
		if args[1] == "check" {
			want = exitQuality
		}
		if o.code != want {
			t.Fatalf("%s: exit %d, want %d\n%s", l, o.code, want, o.stderr)
		}
		if args[1] == "check" && (!strings.Contains(o.stdout, "v10") || !strings.Contains(o.stdout, "v39")) {
			t.Errorf("check does not flag v10 and v39 as the page says:\n%s", o.stdout)
		}
	}
	for _, f := range []string{"sim/transform.json", "sim/mapped.csv", "sim/mapped.csv.json", "sim/matches.csv", "sim/report.html",
		"sim/overlay.png", "sim/export/export.json", "sim/export/transform.zarr/zarr.json", "sim/export/points.csv", "sim/next.csv"} {
		if info, err := os.Stat(f); err != nil || info.Size() == 0 {
			t.Errorf("%s: not written (%v)", f, err)
		}
	}
}
