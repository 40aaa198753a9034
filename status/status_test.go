package status

import "testing"

// Every status belongs to exactly one vocabulary, and the words are the
// contract's.
func TestVocabularies(t *testing.T) {
	words := map[Status]string{}
	for _, s := range Mapping() {
		if !s.IsMapping() || s.IsMatching() {
			t.Errorf("%q: mapping %v, matching %v", s, s.IsMapping(), s.IsMatching())
		}
		words[s] = s.String()
	}
	for _, s := range Matching() {
		if s.IsMapping() || !s.IsMatching() {
			t.Errorf("%q: mapping %v, matching %v", s, s.IsMapping(), s.IsMatching())
		}
		words[s] = s.String()
	}
	want := []string{"ok", "isolated", "extrapolated", "folded", "no_inverse", "matched", "ambiguous", "unmatched"}
	if len(words) != len(want) {
		t.Fatalf("%d distinct statuses, want %d", len(words), len(want))
	}
	for _, w := range want {
		if words[Status(w)] != w {
			t.Errorf("status %q missing", w)
		}
	}
	if Status("other").IsMapping() || Status("").IsMatching() {
		t.Error("an unknown word counts as a status")
	}
}
