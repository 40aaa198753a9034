package main

import (
	"encoding/csv"
	"math"
	"slices"
	"strconv"
	"strings"
	"testing"

	"ferry/landmarks"
	"ferry/register"
	"ferry/transform"
)

// FuzzFlagValues gives the parsers of the flags' values (per-axis triples,
// id lists, smoothing and model) any text: none panics, and whatever one
// accepts is what the flag promises and reads back the same when written
// out again.
func FuzzFlagValues(f *testing.F) {
	for _, seed := range []string{"1,1,1", "0.5, 0.5 ,2", "1,1", "auto", "AUTO", "0", "1e-3", "-1", "NaN", "1,Inf,1", "L3,L7", `"a,b",c`, " ", "", "tps", "Affine", "0x1p4,1,1", "1e999"} {
		f.Add(seed)
	}
	f.Fuzz(func(t *testing.T, value string) {
		for _, dim := range []int{2, 3} {
			v, err := landmarks.ParseTriple("--cell-sd", value, dim)
			if err != nil {
				if !strings.HasPrefix(err.Error(), "--cell-sd: ") || strings.Contains(err.Error(), "\n") {
					t.Errorf("ParseTriple(%q) error %q: want one line starting with the flag", value, err)
				}
				continue
			}
			parts := make([]string, dim)
			for k := range dim {
				if !(v[k] > 0) || math.IsInf(v[k], 0) {
					t.Errorf("ParseTriple(%q, %d) accepted %v", value, dim, v)
				}
				parts[k] = strconv.FormatFloat(v[k], 'g', -1, 64)
			}
			if dim == 2 && v[2] != 0 {
				t.Errorf("ParseTriple(%q, 2) set Z to %v", value, v[2])
			}
			again, err := landmarks.ParseTriple("--cell-sd", strings.Join(parts, ","), dim)
			if err != nil || again != v {
				t.Errorf("ParseTriple(%q) = %v does not read back: %v, %v", value, v, again, err)
			}
		}

		ids, err := landmarks.ParseIDList("--exclude", value)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "--exclude: ") {
				t.Errorf("ParseIDList(%q) error %q does not name the flag", value, err)
			}
		} else {
			seen := map[string]bool{}
			for _, id := range ids {
				if id == "" || id != strings.TrimSpace(id) || seen[id] {
					t.Errorf("ParseIDList(%q) = %q: an id empty, untrimmed or twice", value, ids)
				}
				seen[id] = true
			}
			if len(ids) > 0 {
				var b strings.Builder
				w := csv.NewWriter(&b)
				w.Write(ids)
				w.Flush()
				again, err := landmarks.ParseIDList("--exclude", strings.TrimSuffix(b.String(), "\n"))
				if err != nil || !slices.Equal(again, ids) {
					t.Errorf("ParseIDList(%q) = %q does not read back from %q: %q, %v", value, ids, b.String(), again, err)
				}
			}
		}

		s, err := register.ParseSmoothing(value)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "--smoothing: ") {
				t.Errorf("ParseSmoothing(%q) error %q does not name the flag", value, err)
			}
		} else {
			if !s.Auto && (!(s.Value >= 0) || math.IsInf(s.Value, 0)) {
				t.Errorf("ParseSmoothing(%q) accepted %v", value, s.Value)
			}
			if again, err := register.ParseSmoothing(s.String()); err != nil || again != s {
				t.Errorf("ParseSmoothing(%q) = %v does not read back: %v, %v", value, s, again, err)
			}
		}

		k, err := register.ParseModel(value)
		if err != nil {
			if !strings.HasPrefix(err.Error(), "--model: ") {
				t.Errorf("ParseModel(%q) error %q does not name the flag", value, err)
			}
		} else if k != "" && !slices.Contains(transform.Kinds(), k) {
			t.Errorf("ParseModel(%q) = %q, not a model", value, k)
		}
	})
}
