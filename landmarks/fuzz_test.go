package landmarks

import (
	"bytes"
	"errors"
	"os"
	"path/filepath"
	"testing"
)

// addSamples seeds f with every file of the sample folder and a few
// awkward fragments.
func addSamples(f *testing.F) {
	entries, err := os.ReadDir(testdata)
	if err != nil {
		f.Fatal(err)
	}
	for _, e := range entries {
		b, err := os.ReadFile(filepath.Join(testdata, e.Name()))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	for _, s := range []string{"", "\uFEFF", "#\n", "id,x,y,z\n\"", "id,x,y\na,1,2\na,1,2\n", "id,x,y,z\r\n\xe2\x82"} {
		f.Add([]byte(s))
	}
}

// checkInputError fails unless err is an *InputError with a one-line
// message.
func checkInputError(t *testing.T, err error) {
	var in *InputError
	if !errors.As(err, &in) {
		t.Fatalf("error %T %v is not an *InputError", err, err)
	}
	if bytes.ContainsAny([]byte(err.Error()), "\r\n") {
		t.Fatalf("message spans lines: %q", err.Error())
	}
}

func FuzzParsePairs(f *testing.F) {
	addSamples(f)
	f.Fuzz(func(t *testing.T, data []byte) {
		set, err := ParsePairs("fuzz.csv", bytes.NewReader(data))
		if err != nil {
			checkInputError(t, err)
			return
		}
		if set.Dim != 2 && set.Dim != 3 || len(set.Pairs) == 0 {
			t.Fatalf("Dim %d with %d pairs", set.Dim, len(set.Pairs))
		}
		ids := make(map[string]bool)
		for _, p := range set.Pairs {
			if !p.Source.IsFinite() || !p.Target.IsFinite() {
				t.Fatalf("pair %q on line %d is not finite: %v %v", p.ID, p.Line, p.Source, p.Target)
			}
			if set.Dim == 2 && (p.Source[2] != 0 || p.Target[2] != 0) {
				t.Fatalf("2-D pair %q has a z", p.ID)
			}
			if p.ID == "" || ids[p.ID] {
				t.Fatalf("id %q empty or repeated", p.ID)
			}
			ids[p.ID] = true
			switch p.Kind {
			case KindVessel, KindSoma, KindOther:
			default:
				t.Fatalf("pair %q has kind %q", p.ID, p.Kind)
			}
			if len(p.Extra) != len(set.ExtraColumns) || p.Line < 1 {
				t.Fatalf("pair %q: %d extra values for %d columns, line %d", p.ID, len(p.Extra), len(set.ExtraColumns), p.Line)
			}
		}
	})
}

func FuzzParsePoints(f *testing.F) {
	addSamples(f)
	f.Fuzz(func(t *testing.T, data []byte) {
		set, err := ParsePoints("fuzz.csv", "cells", bytes.NewReader(data))
		if err != nil {
			checkInputError(t, err)
			return
		}
		if set.Dim != 2 && set.Dim != 3 || len(set.Points) == 0 {
			t.Fatalf("Dim %d with %d points", set.Dim, len(set.Points))
		}
		ids := make(map[string]bool)
		for _, p := range set.Points {
			if !p.Pos.IsFinite() {
				t.Fatalf("point %q on line %d is not finite: %v", p.ID, p.Line, p.Pos)
			}
			if set.Dim == 2 && p.Pos[2] != 0 {
				t.Fatalf("2-D point %q has a z", p.ID)
			}
			if p.ID == "" || ids[p.ID] {
				t.Fatalf("id %q empty or repeated", p.ID)
			}
			ids[p.ID] = true
			if len(p.Extra) != len(set.ExtraColumns) || p.Line < 1 {
				t.Fatalf("point %q: %d extra values for %d columns, line %d", p.ID, len(p.Extra), len(set.ExtraColumns), p.Line)
			}
		}
	})
}

func FuzzParseDecisions(f *testing.F) {
	addSamples(f)
	for _, s := range []string{
		"id,candidate,decision\nc1,n1,accepted\nc1,n2,accepted\nc2,,none\n",
		"id,candidate,decision,decided_at,note\nc1,n1,rejected,2026-03-01T10:00:00Z,\"a, b\"\n",
	} {
		f.Add([]byte(s))
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		set, err := ParseDecisions("fuzz.csv", bytes.NewReader(data))
		if err != nil {
			checkInputError(t, err)
			return
		}
		type key struct{ id, cand string }
		seen := map[key]bool{}
		settled := map[string]bool{}
		for _, d := range set.Decisions {
			if d.ID == "" {
				t.Fatalf("empty id on line %d", d.Line)
			}
			if (d.Candidate == "") != (d.Verdict == NoCounterpart) {
				t.Fatalf("line %d: candidate %q with %s", d.Line, d.Candidate, d.Verdict)
			}
			if seen[key{d.ID, d.Candidate}] {
				t.Fatalf("cell %q and candidate %q twice", d.ID, d.Candidate)
			}
			seen[key{d.ID, d.Candidate}] = true
			if d.Verdict == Accepted || d.Verdict == NoCounterpart {
				if settled[d.ID] {
					t.Fatalf("cell %q settled twice", d.ID)
				}
				settled[d.ID] = true
			}
		}
	})
}
