package transform

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func sampleFile(t *testing.T, tr Transform) *File {
	t.Helper()
	v := Vec{0.5, 0.5, 2}
	return &File{
		Program: "ferry test", SourceVoxel: &v,
		Landmarks: Provenance{Path: "pairs.csv", SHA256: strings.Repeat("ab", 32), Excluded: []string{"v3"}},
		Transform: tr, Smoothing: 0,
		Summary:     json.RawMessage(`{"rms_um": 1.5}`),
		Uncertainty: json.RawMessage(`{"scale": [1, 2, 3]}`),
	}
}

func TestFileRoundTrip(t *testing.T) {
	src := []Vec{{0, 0, 0}, {100, 0, 0}, {0, 120, 0}, {0, 0, 80}, {60, 70, 40}, {20, 90, 10}, {90, 30, 70}}
	dst := make([]Vec, len(src))
	for i, p := range src {
		dst[i] = Vec{21000 - 0.9*p[0] + 0.01*p[1]*p[1], 14000 + 0.92*p[1], 3000 + 0.75*p[2] + 0.002*p[0]*p[2]}
	}
	aff, err := Fit(Affine, 3, src, dst, Options{})
	if err != nil {
		t.Fatal(err)
	}
	tps, err := Fit(TPS, 3, src, dst, Options{Smoothing: 0.5})
	if err != nil {
		t.Fatal(err)
	}
	chain, err := NewChain(aff.Transform, &Linear{Model: Translation, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1})
	if err != nil {
		t.Fatal(err)
	}
	for _, tr := range []Transform{aff.Transform, tps.Transform, chain} {
		t.Run(string(tr.Kind()), func(t *testing.T) {
			f := sampleFile(t, tr)
			data, err := f.Marshal()
			if err != nil {
				t.Fatal(err)
			}
			g, err := Unmarshal("t.json", data)
			if err != nil {
				t.Fatal(err)
			}
			for _, p := range append(src, Vec{500, -40, 300}) {
				a, b := tr.Apply(p), g.Transform.Apply(p)
				if a.Sub(b).Norm() > 1e-9*(1+a.Norm()) {
					t.Errorf("Apply(%v): %v after a round trip, %v before", p, b, a)
				}
			}
			again, err := g.Marshal()
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(data, again) {
				t.Error("writing a file read back changes its bytes")
			}
			if *g.SourceVoxel != *f.SourceVoxel || g.TargetVoxel != nil || g.Landmarks.Excluded[0] != "v3" {
				t.Errorf("metadata changed: %+v", g)
			}
		})
	}
}

func TestFileRefusals(t *testing.T) {
	l := &Linear{Model: Rigid, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1}
	data, err := sampleFile(t, l).Marshal()
	if err != nil {
		t.Fatal(err)
	}
	good := string(data)
	tests := []struct {
		name, data, want string
	}{
		{"not JSON", "hello", "not a ferry transform file"},
		{"truncated", good[:len(good)/2], "not a ferry transform file"},
		{"another format", strings.Replace(good, FormatName, "other-format", 1), `format "other-format"`},
		{"newer version", strings.Replace(good, `"version": 1`, `"version": 2`, 1), "newer than this program reads"},
		{"changed number", strings.Replace(good, `"smoothing": 0`, `"smoothing": 1`, 1), "does not match its checksum"},
		{"unknown field", strings.Replace(good, `"units"`, `"colour": "red", "units"`, 1), "damaged transform file"},
		{"empty", "", "not a ferry transform file"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Unmarshal("t.json", []byte(tc.data))
			if err == nil {
				t.Fatal("accepted")
			}
			if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "t.json:") {
				t.Errorf("error %q, want the file name and %q", err, tc.want)
			}
		})
	}
}

// A file whose checksum is right but whose parameters are not a valid
// transform (written by hand, say) is refused by the model's own check.
func TestFileInvalidParameters(t *testing.T) {
	l := &Linear{Model: Rigid, D: 3, A: Mat{{2, 0, 0}, {0, 1, 0}, {0, 0, 1}}, T: Vec{}, Scale: 1}
	if _, err := sampleFile(t, l).Marshal(); err != nil {
		t.Fatal(err)
	}
	data, _ := sampleFile(t, l).Marshal()
	if _, err := Unmarshal("bad.json", data); err == nil {
		t.Error("a rigid transform that stretches was accepted")
	}
}

func ExampleFile_Marshal() {
	f := &File{
		Program:   "ferry example",
		Landmarks: Provenance{Path: "pairs.csv", SHA256: "0"},
		Transform: &Linear{Model: Translation, D: 2, A: Identity(), T: Vec{5, -3, 0}, Scale: 1},
	}
	data, err := f.Marshal()
	if err != nil {
		panic(err)
	}
	g, err := Unmarshal("example.json", data)
	if err != nil {
		panic(err)
	}
	p := g.Transform.Apply(Vec{1, 1, 0})
	fmt.Printf("%s %.0f %.0f\n", g.Transform.Kind(), p[0], p[1])
	// Output: translation 6 -2
}

// FuzzUnmarshal: no input makes the reader panic, and whatever it accepts
// is a transform that maps a point to finite numbers.
func FuzzUnmarshal(f *testing.F) {
	l := &Linear{Model: Rigid, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1}
	good, err := (&File{Program: "fuzz", Transform: l}).Marshal()
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add([]byte(`{"format":"ferry-transform","version":1}`))
	f.Add([]byte(`{}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		g, err := Unmarshal("fuzz.json", data)
		if err != nil {
			// "fuzz.json: …", or "fuzz.json:LINE:COL: …" for a JSON error.
			if !strings.HasPrefix(err.Error(), "fuzz.json:") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		if p := g.Transform.Apply(Vec{1, 2, 3}); !p.IsFinite() {
			t.Fatalf("accepted a transform that maps to %v", p)
		}
	})
}

// FuzzReadFileSizeLimit reaches the size limit's paths with small inputs:
// given a limit, a file of more bytes is refused, naming the file and the
// limit, whether it is read by ReadFile or given to Unmarshal, and a file
// within it reads as Unmarshal reads it without a limit.
func FuzzReadFileSizeLimit(f *testing.F) {
	l := &Linear{Model: Rigid, D: 3, A: Identity(), T: Vec{1, 2, 3}, Scale: 1}
	good, err := (&File{Program: "fuzz", Transform: l}).Marshal()
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good, uint16(len(good)))
	f.Add(good, uint16(len(good)-1))
	f.Add([]byte("   \n\t  "), uint16(3))
	f.Add([]byte(`"`+strings.Repeat("a", 300)+`"`), uint16(100))
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte, limit uint16) {
		path := filepath.Join(dir, "t.json")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		_, whole := Unmarshal(path, data)
		for _, read := range []func() (*File, error){
			func() (*File, error) { return readFileLimited(path, int(limit)) },
			func() (*File, error) { return unmarshalLimited(path, data, int(limit)) },
		} {
			_, err := read()
			switch {
			case len(data) > int(limit):
				if err == nil || !strings.HasPrefix(err.Error(), path+": more than") {
					t.Fatalf("%d bytes over a limit of %d: %v", len(data), limit, err)
				}
			case (err == nil) != (whole == nil):
				t.Fatalf("within the limit: %v, without a limit: %v", err, whole)
			}
		}
	})
}
