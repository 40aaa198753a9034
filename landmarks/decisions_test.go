package landmarks

import (
	"strings"
	"testing"
)

func TestParseDecisions(t *testing.T) {
	text := "# review of 2026-03-01\nid,candidate,decision,decided_at,note,who\n" +
		"c1,n1,accepted,2026-03-01T10:00:00Z,,ab\n" +
		"c2,n2,Rejected,,\"looks, odd\",ab\n" +
		"c3,,none,,,cd\n" +
		"c2,n2,accepted,2026-03-01T10:05:00+01:00,changed my mind,ab\n" +
		"c1,n9,accepted,,,ef\n" +
		"c4,n4,rejected,,,\n" +
		"c3,n3,accepted,,,\n"
	set, err := ParseDecisions("d.csv", strings.NewReader(text))
	if err != nil {
		t.Fatal(err)
	}
	type row struct {
		id, cand string
		v        Verdict
		line     int
	}
	var got []row
	for _, d := range set.Decisions {
		got = append(got, row{d.ID, d.Candidate, d.Verdict, d.Line})
	}
	// c2/n2 replaced in place; c1's later acceptance replaces n1; c3's
	// acceptance replaces its none.
	want := []row{{"c2", "n2", Accepted, 6}, {"c1", "n9", Accepted, 7}, {"c4", "n4", Rejected, 8}, {"c3", "n3", Accepted, 9}}
	if len(got) != len(want) {
		t.Fatalf("decisions %v, want %v", got, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("decision %d: %v, want %v", i, got[i], want[i])
		}
	}
	if set.Decisions[0].Note != "changed my mind" || set.Decisions[0].DecidedAt != "2026-03-01T10:05:00+01:00" {
		t.Errorf("note and time %q %q", set.Decisions[0].Note, set.Decisions[0].DecidedAt)
	}
	if len(set.ExtraColumns) != 1 || set.ExtraColumns[0] != "who" || set.Decisions[1].Extra[0] != "ef" {
		t.Errorf("extra columns %v, %v", set.ExtraColumns, set.Decisions[1].Extra)
	}

	empty, err := ParseDecisions("d.csv", strings.NewReader("id,candidate,decision\n"))
	if err != nil || len(empty.Decisions) != 0 {
		t.Errorf("header only: %v, %v", empty, err)
	}
}

func TestParseDecisionsErrors(t *testing.T) {
	for _, tc := range []struct{ text, err string }{
		{"id,candidate\nc1,n1\n", `d.csv:1: column "decision": missing from the header`},
		{"id,candidate,decision\nc1,n1,maybe\n", `d.csv:2: column "decision": "maybe" is not a decision`},
		{"id,candidate,decision\nc1,,accepted\n", `d.csv:2: column "candidate": empty: a decision accepted needs the candidate`},
		{"id,candidate,decision\n\nc1,n1,none\n", `d.csv:3: column "candidate": "n1" given with decision none`},
		{"id,candidate,decision\n,n1,rejected\n", `d.csv:2: column "id": empty id`},
		{"id,candidate,decision,decided_at\nc1,n1,accepted,yesterday\n", `d.csv:2: column "decided_at": "yesterday" is not a time`},
		{"id,candidate,decision\nc1,n1\n", `d.csv:2: column "decision": missing`},
	} {
		_, err := ParseDecisions("d.csv", strings.NewReader(tc.text))
		if err == nil || !strings.HasPrefix(err.Error(), tc.err) {
			t.Errorf("%q: error %v, want one starting %q", tc.text, err, tc.err)
		}
	}
}
