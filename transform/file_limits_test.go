package transform

import (
	"context"
	"errors"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// TestFileSyntaxErrorPosition: a syntax or type error in a transform file
// names its line and column. Before, the message gave neither.
func TestFileSyntaxErrorPosition(t *testing.T) {
	for _, tc := range []struct {
		name, data, want string
	}{
		{"stray character", "{\n  \"format\": \"ferry-transform\",\n  \"version\": 1 x\n}", "t.json:3:16: "},
		{"missing comma", "{\n\"format\": \"ferry-transform\"\n\"version\": 1}", "t.json:3:1: "},
		{"truncated", "{\n  \"format\": \"ferry-transform\",\n  \"vers", "t.json:3:7: "},
		{"wrong type", "{\n  \"format\": 7\n}", "t.json:2:13: "},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Unmarshal("t.json", []byte(tc.data))
			if err == nil || !strings.HasPrefix(err.Error(), tc.want) {
				t.Errorf("error %v, want it to begin %q", err, tc.want)
			}
		})
	}
}

// TestReadFileSizeLimit: a file larger than MaxFileBytes is refused before
// it is read, and from a stream no more than that is read. Before, a 1 GiB
// file of whitespace took 37 s and 4.2 GB, a 1 GiB string was killed at
// 8 GiB.
func TestReadFileSizeLimit(t *testing.T) {
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
		_, err := ReadFile(p)
		if err == nil || !strings.Contains(err.Error(), "64 MiB") || !strings.Contains(err.Error(), p) {
			t.Errorf("%s: error %v, want a refusal naming the file and the limit", p, err)
		}
	}
	if _, err := Unmarshal("big", make([]byte, MaxFileBytes+1)); err == nil || !strings.Contains(err.Error(), "MiB") {
		t.Errorf("Unmarshal of more than MaxFileBytes: %v", err)
	}
}

// TestFitStopsWhenCancelled: a spline fit with a cancelled context stops
// with the context's error; without one it fits.
func TestFitStopsWhenCancelled(t *testing.T) {
	var src, dst []Vec
	for i := range 30 {
		x := Vec{float64(i % 3 * 10), float64(i / 3 % 5 * 10), float64(i / 15 * 10)}
		x[0] += float64(i) * 0.37
		src = append(src, x)
		dst = append(dst, x.Add(Vec{1, 2, 3}))
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := Fit(TPS, 3, src, dst, Options{LeaveOneOut: true, Context: ctx}); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled fit: %v, want context.Canceled", err)
	}
	if _, err := Fit(TPS, 3, src, dst, Options{LeaveOneOut: true, Context: context.Background()}); err != nil {
		t.Errorf("live fit: %v", err)
	}
}
