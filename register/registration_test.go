package register

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"ferry/transform"
)

// TestRegistrationFilesReadAndWriteBack: the registration files in
// testdata/registration were written by ferry fit (and the demo) before the
// Registration type existed, when transform.File held them. They still
// read, and writing what was read gives the same bytes, checksum included:
// the format did not change.
func TestRegistrationFilesReadAndWriteBack(t *testing.T) {
	paths, err := filepath.Glob(filepath.Join("..", "testdata", "registration", "*.json"))
	if err != nil || len(paths) < 4 {
		t.Fatalf("registration files: %v, %v", paths, err)
	}
	for _, path := range paths {
		t.Run(filepath.Base(path), func(t *testing.T) {
			data, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			r, err := ReadRegistrationFile(path)
			if err != nil {
				t.Fatal(err)
			}
			if r.Check == nil || r.Uncertainty == nil || r.Landmarks.SHA256 == "" {
				t.Errorf("check %v, uncertainty %v, landmarks %+v: want all three", r.Check != nil, r.Uncertainty != nil, r.Landmarks)
			}
			var buf bytes.Buffer
			n, err := r.WriteTo(&buf)
			if err != nil {
				t.Fatal(err)
			}
			if n != int64(buf.Len()) || !bytes.Equal(buf.Bytes(), data) {
				t.Errorf("written back: %d bytes (WriteTo says %d), differ from the %d read", buf.Len(), n, len(data))
			}
			if _, err := NewMapper(r); err != nil {
				t.Errorf("NewMapper: %v", err)
			}
		})
	}
}

// TestRegistrationVoxelsAndExclusions: what PrepareLandmarks records (the
// landmark file, the ids left out, the voxel sizes) is what the file says
// and what reads back.
func TestRegistrationVoxelsAndExclusions(t *testing.T) {
	path := filepath.Join("..", "testdata", "registration", "fit2d.json")
	r, err := ReadRegistrationFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if r.Voxels.Source != nil || r.Voxels.Target == nil || *r.Voxels.Target != (transform.Vec{2, 2, 1}) {
		t.Errorf("voxels %+v, want target 2 × 2 (× 1) µm only", r.Voxels)
	}
	if got := strings.Join(r.Landmarks.Excluded, ","); got != "D" {
		t.Errorf("excluded %q, want D", got)
	}
	if r.Dim() != 2 || r.Check.Dim != 2 {
		t.Errorf("dimension %d, check %d: want 2", r.Dim(), r.Check.Dim)
	}
}

func sampleRegistration(tr transform.Transform) *Registration {
	v := transform.Vec{0.5, 0.5, 2}
	return &Registration{
		Program: "ferry test", Voxels: Voxels{Source: &v},
		Landmarks: LandmarkSource{Path: "pairs.csv", SHA256: strings.Repeat("ab", 32), Excluded: []string{"v3"}},
		Transform: tr,
		Check:     &CheckJSON{Model: string(tr.Kind()), Dim: tr.Dim(), RMSUM: 1.5},
	}
}

func TestRegistrationRefusals(t *testing.T) {
	l := &transform.Linear{Model: transform.Rigid, D: 3, A: transform.Identity(), T: transform.Vec{1, 2, 3}, Scale: 1}
	data, err := sampleRegistration(l).Marshal()
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
			_, err := ReadRegistration(strings.NewReader(tc.data), "t.json")
			if err == nil {
				t.Fatal("accepted")
			}
			if !strings.Contains(err.Error(), tc.want) || !strings.HasPrefix(err.Error(), "t.json:") {
				t.Errorf("error %q, want the file name and %q", err, tc.want)
			}
		})
	}
}

// A file whose checksum is right but whose uncertainty model cannot be used
// is refused when read, with the model's own words.
func TestRegistrationBadUncertainty(t *testing.T) {
	l := &transform.Linear{Model: transform.Rigid, D: 3, A: transform.Identity(), Scale: 1}
	r := sampleRegistration(l)
	r.Uncertainty = &UncertaintyModel{Method: "guesswork"}
	data, err := r.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	_, err = ReadRegistration(bytes.NewReader(data), "t.json")
	if err == nil || err.Error() != `t.json: uncertainty model "guesswork" is not one this program knows` {
		t.Errorf("error %v", err)
	}
	if _, err := NewMapper(r); err == nil || !strings.Contains(err.Error(), "guesswork") {
		t.Errorf("NewMapper of the model in memory: %v", err)
	}
	r.Uncertainty = nil
	if _, err := NewMapper(r); err == nil || err.Error() != "the transform file has no uncertainty model" {
		t.Errorf("NewMapper without a model: %v", err)
	}
}

// TestRegistrationSyntaxErrorPosition: a syntax or type error in a
// registration file names its line and column.
func TestRegistrationSyntaxErrorPosition(t *testing.T) {
	for _, tc := range []struct {
		name, data, want string
	}{
		{"stray character", "{\n  \"format\": \"ferry-transform\",\n  \"version\": 1 x\n}", "t.json:3:16: "},
		{"missing comma", "{\n\"format\": \"ferry-transform\"\n\"version\": 1}", "t.json:3:1: "},
		{"truncated", "{\n  \"format\": \"ferry-transform\",\n  \"vers", "t.json:3:7: "},
		{"wrong type", "{\n  \"format\": 7\n}", "t.json:2:13: "},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ReadRegistration(strings.NewReader(tc.data), "t.json")
			if err == nil || !strings.HasPrefix(err.Error(), tc.want) {
				t.Errorf("error %v, want it to begin %q", err, tc.want)
			}
		})
	}
}

// TestReadRegistrationSizeLimit: a file larger than MaxFileBytes is refused
// before it is read, and from a stream no more than that is read. Before
// the limit, a 1 GiB file of whitespace took 37 s and 4.2 GB, a 1 GiB
// string was killed at 8 GiB.
func TestReadRegistrationSizeLimit(t *testing.T) {
	dir := t.TempDir()
	sparse := filepath.Join(dir, "huge.json")
	f, err := os.Create(sparse)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Truncate(1 << 30); err != nil { // sparse: takes no disk
		t.Fatal(err)
	}
	f.Close()
	paths := []string{sparse}
	if runtime.GOOS == "linux" {
		paths = append(paths, "/dev/zero") // a stream without end
	}
	for _, p := range paths {
		_, err := ReadRegistrationFile(p)
		if err == nil || !strings.Contains(err.Error(), "64 MiB") || !strings.Contains(err.Error(), p) {
			t.Errorf("%s: error %v, want a refusal naming the file and the limit", p, err)
		}
	}
	if _, err := ReadRegistration(bytes.NewReader(make([]byte, MaxFileBytes+1)), "big"); err == nil || !strings.Contains(err.Error(), "MiB") {
		t.Errorf("ReadRegistration of more than MaxFileBytes: %v", err)
	}
}

// FuzzReadRegistration: no input makes the reader panic, and whatever it
// accepts is a transform that maps a point to finite numbers.
func FuzzReadRegistration(f *testing.F) {
	l := &transform.Linear{Model: transform.Rigid, D: 3, A: transform.Identity(), T: transform.Vec{1, 2, 3}, Scale: 1}
	good, err := (&Registration{Program: "fuzz", Transform: l}).Marshal()
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add([]byte(`{"format":"ferry-transform","version":1}`))
	f.Add([]byte(`{}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		g, err := ReadRegistration(bytes.NewReader(data), "fuzz.json")
		if err != nil {
			// "fuzz.json: …", or "fuzz.json:LINE:COL: …" for a JSON error.
			if !strings.HasPrefix(err.Error(), "fuzz.json:") {
				t.Fatalf("error does not name the file: %v", err)
			}
			return
		}
		if p := g.Transform.Apply(transform.Vec{1, 2, 3}); !p.IsFinite() {
			t.Fatalf("accepted a transform that maps to %v", p)
		}
	})
}

// FuzzReadRegistrationSizeLimit reaches the size limit's paths with small
// inputs: given a limit, a file of more bytes is refused, naming the file
// and the limit, whether it is read from the file or from a reader, and a
// file within it reads as it reads without a limit.
func FuzzReadRegistrationSizeLimit(f *testing.F) {
	l := &transform.Linear{Model: transform.Rigid, D: 3, A: transform.Identity(), T: transform.Vec{1, 2, 3}, Scale: 1}
	good, err := (&Registration{Program: "fuzz", Transform: l}).Marshal()
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
		_, whole := ReadRegistration(bytes.NewReader(data), path)
		for _, read := range []func() (*Registration, error){
			func() (*Registration, error) { return readFileLimited(path, int(limit)) },
			func() (*Registration, error) { return readLimited(bytes.NewReader(data), path, int(limit)) },
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

// The check and the uncertainty model are decoded once, when the file is
// read: a check that is not the check's JSON is refused then, naming it.
func TestRegistrationBadCheck(t *testing.T) {
	l := &transform.Linear{Model: transform.Rigid, D: 3, A: transform.Identity(), Scale: 1}
	data, err := sampleRegistration(l).Marshal()
	if err != nil {
		t.Fatal(err)
	}
	var w fileJSON
	if err := json.Unmarshal(data, &w); err != nil {
		t.Fatal(err)
	}
	w.Summary = json.RawMessage(`{"dim": "three"}`)
	if w.Checksum, err = checksum(w); err != nil {
		t.Fatal(err)
	}
	bad, err := json.Marshal(w)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := ReadRegistration(bytes.NewReader(bad), "t.json"); err == nil || !strings.HasPrefix(err.Error(), "t.json: leave-one-out check: ") {
		t.Errorf("error %v", err)
	}
}
