package report

import (
	"regexp"
	"runtime"
	"strings"
	"testing"

	"ferry/register/match"
	"ferry/status"
)

func TestSelfContained(t *testing.T) {
	for _, dim := range []int{2, 3} {
		in := scenarioInput(t, dim, nil)
		in.Matches = []match.Row{{ID: "c01", Candidate: "n1", PMatch: 0.5, DistanceUM: 2, RunnerUp: "n2", PRunnerUp: 0.45, Status: status.Ambiguous}}
		html, _ := render(t, in)
		lower := strings.ToLower(html)
		for _, banned := range []string{"http://", "https://", "<script", "<link", "@import", "@font-face", "<iframe", "url(", "//www."} {
			if strings.Contains(lower, banned) {
				i := strings.Index(lower, banned)
				t.Errorf("%d-D: the page holds %q: …%s…", dim, banned, html[max(0, i-60):min(len(html), i+60)])
			}
		}
		// Every reference the page makes is to itself: a data: URI or a
		// fragment.
		for _, m := range regexp.MustCompile(`(?i)\b(?:href|src)\s*=\s*"([^"]*)"`).FindAllStringSubmatch(html, -1) {
			if !strings.HasPrefix(m[1], "data:image/png;base64,") && !strings.HasPrefix(m[1], "#") {
				t.Errorf("%d-D: reference %.60q is neither an embedded image nor a fragment", dim, m[1])
			}
		}
	}
}

func TestDeterministic(t *testing.T) {
	in := scenarioInput(t, 3, nil)
	first, _ := render(t, in)
	again, _ := render(t, scenarioInput(t, 3, nil))
	if first != again {
		t.Fatal("two reports of the same inputs differ")
	}
	// The map is computed on all cores; one core must give the same bytes.
	old := runtime.GOMAXPROCS(1)
	defer runtime.GOMAXPROCS(old)
	if serial, _ := render(t, scenarioInput(t, 3, nil)); serial != first {
		t.Fatal("the report on one core differs from the one on all cores")
	}
}

func TestFigures(t *testing.T) {
	labels := []string{
		"Leave-one-out error of every landmark against its predicted 95 % radius",
		"Leave-one-out errors as arrows in the projections of the source volume",
		"Predicted 95 % radius r95 over the imaged field",
		"Calibration: observed against expected coverage of the leave-one-out errors",
	}
	for _, dim := range []int{2, 3} {
		html, page := render(t, scenarioInput(t, dim, nil))
		if n := strings.Count(html, "<svg "); n != len(labels) || page.Figures() != len(labels) {
			t.Errorf("%d-D: %d <svg> elements, Figures() %d: want %d", dim, n, page.Figures(), len(labels))
		}
		if n := strings.Count(html, "</svg>"); n != len(labels) {
			t.Errorf("%d-D: %d </svg>: want %d", dim, n, len(labels))
		}
		for _, l := range labels {
			if !strings.Contains(html, `aria-label="`+l+`"`) {
				t.Errorf("%d-D: no figure %q", dim, l)
			}
		}
		if len(page.Warnings) != 0 {
			t.Errorf("%d-D: warnings %q", dim, page.Warnings)
		}
		// The map draws the cells and the flagged landmarks; the scenario
		// has both.
		for _, want := range []string{"cell: ok", "flagged landmark", "edge of the landmarks&#39; hull", "r95 (µm)", "µm of error"} {
			if !strings.Contains(html, want) {
				t.Errorf("%d-D: the page does not show %q", dim, want)
			}
		}
	}
}

func TestHeader(t *testing.T) {
	in := scenarioInput(t, 3, nil)
	html, _ := render(t, in)
	ck := in.Check
	for _, want := range []string{
		"must be checked by eye",
		`<meta name="generator" content="ferry `,
		`<meta name="ferry-provenance" content="ferry `,
		in.Provenance.Inputs[0].SHA256,
		"Model</dt><dd>" + ck.Model,
		"RMS " + um(ck.RMSUM) + " µm",
	} {
		if !strings.Contains(html, want) {
			t.Errorf("the page does not hold %q", want)
		}
	}
	if len(ck.Flagged) == 0 {
		t.Fatal("the scenario has wrong landmarks; the check flagged none")
	}
	for _, id := range ck.Flagged {
		if !strings.Contains(html, "<code>"+id+"</code>") {
			t.Errorf("flagged landmark %s is not named", id)
		}
	}
}

// An id is the user's text: it must come out as text, never as markup,
// in the tables and in the figures alike.
func TestEscapesIDs(t *testing.T) {
	hostile := `<script>alert("x")</script>`
	in := scenarioInput(t, 3, func(i int, id string) string {
		if i == 0 {
			return hostile
		}
		return id
	})
	in.LandmarkFile = `lm"><img src=x onerror=alert(1)>.csv`
	in.Matches = []match.Row{{ID: "<b>c1</b>", Candidate: "n1", PMatch: 0.5, DistanceUM: 1, RunnerUp: "<i>n2</i>", PRunnerUp: 0.4, Status: status.Ambiguous}}
	html, _ := render(t, in)
	lower := strings.ToLower(html)
	for _, banned := range []string{"<script", "<img", "<b>c1", "<i>n2"} {
		if strings.Contains(lower, banned) {
			t.Errorf("the page holds the markup %q of a user's id or file name", banned)
		}
	}
	if !strings.Contains(html, "&lt;script&gt;") {
		t.Error("the hostile id is not shown escaped")
	}
}

func TestNoTransform(t *testing.T) {
	in := scenarioInput(t, 3, nil)
	in.Transform, in.Cells = nil, nil
	html, page := render(t, in)
	if page.Figures() != 2 || len(page.Warnings) != 2 {
		t.Errorf("without a transform: %d figures and warnings %q; want 2 figures (errors, calibration) and 2 warnings", page.Figures(), page.Warnings)
	}
	if !strings.Contains(html, "The uncertainty map is not drawn") {
		t.Error("the page does not say why the map is missing")
	}
}

func TestNewRefusesBadInput(t *testing.T) {
	for _, tc := range []struct {
		name string
		edit func(*Input)
		want string
	}{
		{"no check", func(in *Input) { in.Check = nil }, "no check"},
		{"positions", func(in *Input) { in.Source = in.Source[1:] }, "source positions"},
		{"dimension", func(in *Input) { in.Check.Dim = 4 }, "want 2 or 3"},
		{"error vector", func(in *Input) { in.Check.Landmarks[2].LOOUM = in.Check.Landmarks[2].LOOUM[:2] }, "2-D error"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			in := scenarioInput(t, 3, nil)
			tc.edit(in)
			_, err := New(in)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one saying %q", err, tc.want)
			}
		})
	}
}

// The cost of a report once the check is made: the figures, the map of r95
// and the page.
func BenchmarkNew(b *testing.B) {
	for _, dim := range []int{2, 3} {
		in := scenarioInput(b, dim, nil)
		b.Run(map[int]string{2: "2-D", 3: "3-D"}[dim], func(b *testing.B) {
			for b.Loop() {
				if _, err := New(in); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// The ambiguous table shows how likely "no counterpart" is beside the
// runner-up: it is often the real competitor of the chosen candidate.
func TestAmbiguousShowsNoCounterpart(t *testing.T) {
	in := scenarioInput(t, 3, nil)
	in.Matches = []match.Row{{ID: "c07", Candidate: "n1", PMatch: 0.61, DistanceUM: 2, RunnerUp: "n2", PRunnerUp: 0.001, PNone: 0.389, Status: status.Ambiguous}}
	html, _ := render(t, in)
	for _, want := range []string{"<th class=\"num\">p no counterpart</th>", "<td class=\"num\">0.389</td>"} {
		if !strings.Contains(html, want) {
			t.Errorf("the report lacks %q", want)
		}
	}
}
