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
// id lists, smoothing, model, the number flags and --prior-counterpart) any
// text: none panics, whatever one accepts is within the flag's range (a
// per-axis value from landmarks.MinPerAxisUM to MaxPerAxisUM, a
// probability in (0, 1), a smoothing ≥ 0), was written without digit
// separators or hexadecimal, and reads back the same when written out
// again.
func FuzzFlagValues(f *testing.F) {
	for _, seed := range []string{"1,1,1", "0.5, 0.5 ,2", "1,1", "auto", "AUTO", "0", "1e-3", "-1", "NaN", "1,Inf,1", "L3,L7", `"a,b",c`, " ", "", "tps", "Affine", "0x1p4,1,1", "1e999",
		"1e300,1,1", "5e-324,1,1", "1e6,1e-6,1", "1_0", "1_234.5", "0_5", "0.5", "1e-7,1,1", "1000000.0000001,1,1"} {
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
			if strings.ContainsAny(value, "_xX") {
				t.Errorf("ParseTriple(%q) accepted digit separators or hexadecimal", value)
			}
			parts := make([]string, dim)
			for k := range dim {
				if !(v[k] >= landmarks.MinPerAxisUM && v[k] <= landmarks.MaxPerAxisUM) {
					t.Errorf("ParseTriple(%q, %d) accepted %v, outside the per-axis range", value, dim, v)
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
			// The library speaks of the value; the command names the flag.
			if namesFlag(err, value) || strings.Contains(err.Error(), "\n") || !strings.Contains(err.Error(), "auto") {
				t.Errorf("ParseSmoothing(%q) error %q: want one line on the value, without a flag", value, err)
			}
		} else {
			if !s.Auto && (!(s.Value >= 0) || math.IsInf(s.Value, 0) || strings.ContainsAny(value, "_")) {
				t.Errorf("ParseSmoothing(%q) accepted %v", value, s.Value)
			}
			if again, err := register.ParseSmoothing(s.String()); err != nil || again != s {
				t.Errorf("ParseSmoothing(%q) = %v does not read back: %v, %v", value, s, again, err)
			}
		}

		if x, err := landmarks.ParseDecimal(value); err == nil {
			if math.IsNaN(x) || math.IsInf(x, 0) || strings.ContainsAny(value, "_xX") {
				t.Errorf("ParseDecimal(%q) accepted %v", value, x)
			}
			var d decimalFlag
			if err := d.Set(value); err != nil || float64(d) != x {
				t.Errorf("decimalFlag.Set(%q) = %v, %v; ParseDecimal %v", value, d, err, x)
			}
			if again, err := landmarks.ParseDecimal(d.String()); err != nil || again != x {
				t.Errorf("ParseDecimal(%q) = %v does not read back: %v, %v", value, x, again, err)
			}
		} else if strings.Contains(err.Error(), "\n") {
			t.Errorf("ParseDecimal(%q) error %q is not one line", value, err)
		}

		if p, err := parsePrior(value); err != nil {
			if !strings.HasPrefix(err.Error(), "--prior-counterpart: ") {
				t.Errorf("parsePrior(%q) error %q does not name the flag", value, err)
			}
		} else if p != 0 && !(p > 0 && p < 1) || strings.ContainsAny(value, "_") {
			t.Errorf("parsePrior(%q) accepted %v", value, p)
		}

		k, err := register.ParseModel(value)
		if err != nil {
			if namesFlag(err, value) || strings.Contains(err.Error(), "\n") || !strings.Contains(err.Error(), "unknown model") {
				t.Errorf("ParseModel(%q) error %q: want one line on the value, without a flag", value, err)
			}
		} else if k != "" && !slices.Contains(transform.Kinds(), k) {
			t.Errorf("ParseModel(%q) = %q, not a model", value, k)
		}
	})
}

// namesFlag reports whether err's message holds "--" outside the quoted
// value it reports (a value may itself be "--").
func namesFlag(err error, value string) bool {
	return strings.Contains(strings.ReplaceAll(err.Error(), strconv.Quote(value), ""), "--")
}
