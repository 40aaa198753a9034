package register

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"

	"ferry/internal/strictjson"
	"ferry/outfile"
	"ferry/transform"
)

// MaxFileBytes bounds the size of a registration file a reader takes:
// 64 MiB. A file holds about 540 bytes per landmark (measured on splines of
// 500 and 1 000 landmarks), so the limit allows some 120 000 landmarks, far
// more than a spline ferry would fit: its dense system alone would need
// 6 n² × 8 bytes, 700 GB. A larger file (a gigabyte of whitespace, say) is
// refused before it is read, instead of taking the memory and a minute to
// parse.
const MaxFileBytes = 64 << 20

// FormatName and FormatVersion identify the registration file (the
// "transform file" of the command line). A reader refuses another name and
// any version newer than its own.
const (
	FormatName    = "ferry-transform"
	FormatVersion = 1
)

// fileJSON is the wire layout. The checksum covers the compact encoding of
// every other field, so that a file damaged after writing (a truncated copy,
// a changed number) is refused rather than silently used. Its fields and
// their order are the file format: files written before stay readable and
// are written back byte for byte (registration_test.go).
type fileJSON struct {
	Format      string          `json:"format"`
	Version     int             `json:"version"`
	Program     string          `json:"program"`
	Units       string          `json:"units"`
	SourceVoxel *transform.Vec  `json:"source_voxel_um,omitempty"`
	TargetVoxel *transform.Vec  `json:"target_voxel_um,omitempty"`
	Landmarks   LandmarkSource  `json:"landmarks"`
	Model       transform.Kind  `json:"model"`
	Smoothing   float64         `json:"smoothing"`
	Transform   json.RawMessage `json:"transform"`
	Summary     json.RawMessage `json:"leave_one_out,omitempty"`
	Uncertainty json.RawMessage `json:"uncertainty,omitempty"`
	Refinement  json.RawMessage `json:"refinement,omitempty"`
	Checksum    string          `json:"content_sha256"`
}

// Marshal encodes r as indented JSON with its checksum, as WriteTo writes
// it.
func (r *Registration) Marshal() ([]byte, error) {
	if r.Transform == nil {
		return nil, errors.New("transform file without a transform")
	}
	raw, err := transform.Marshal(r.Transform)
	if err != nil {
		return nil, err
	}
	w := fileJSON{
		Format: FormatName, Version: FormatVersion, Program: r.Program, Units: "micrometre",
		SourceVoxel: r.Voxels.Source, TargetVoxel: r.Voxels.Target, Landmarks: r.Landmarks,
		Model: r.Transform.Kind(), Smoothing: r.Smoothing, Transform: raw, Refinement: r.Refinement,
	}
	if w.Landmarks.Excluded == nil {
		w.Landmarks.Excluded = []string{}
	}
	if r.Check != nil {
		if w.Summary, err = json.Marshal(r.Check); err != nil {
			return nil, err
		}
	}
	if r.Uncertainty != nil {
		if w.Uncertainty, err = r.Uncertainty.Marshal(); err != nil {
			return nil, err
		}
	}
	if w.Checksum, err = checksum(w); err != nil {
		return nil, err
	}
	out, err := json.MarshalIndent(w, "", "  ")
	if err != nil {
		return nil, err
	}
	return append(out, '\n'), nil
}

// WriteTo writes the registration file to w.
func (r *Registration) WriteTo(w io.Writer) (int64, error) {
	data, err := r.Marshal()
	if err != nil {
		return 0, err
	}
	n, err := w.Write(data)
	return int64(n), err
}

// WriteFile writes the registration file at path whole or not at all
// (package outfile).
func (r *Registration) WriteFile(ctx context.Context, path string) error {
	data, err := r.Marshal()
	if err != nil {
		return err
	}
	return outfile.WriteBytes(ctx, path, data)
}

func checksum(w fileJSON) (string, error) {
	w.Checksum = ""
	b, err := json.Marshal(w)
	if err != nil {
		return "", err
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:]), nil
}

// ReadRegistration reads a registration file from rd; name is used in
// messages only. It refuses more than MaxFileBytes, a file of another
// format, of a newer version, with fields it does not know, with a checksum
// that does not match, or with parameters that do not make a valid
// transform, check or uncertainty model.
func ReadRegistration(rd io.Reader, name string) (*Registration, error) {
	return readLimited(rd, name, MaxFileBytes)
}

// ReadRegistrationFile reads the registration file at path. A file larger
// than MaxFileBytes is refused before it is read; from a pipe or a device,
// no more than that is read.
func ReadRegistrationFile(path string) (*Registration, error) {
	return readFileLimited(path, MaxFileBytes)
}

func readFileLimited(path string, limit int) (*Registration, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("cannot read transform file: %w", err)
	}
	defer f.Close()
	if info, err := f.Stat(); err == nil && info.Mode().IsRegular() && info.Size() > int64(limit) {
		return nil, tooLarge(path, limit)
	}
	return readLimited(f, path, limit)
}

func readLimited(rd io.Reader, name string, limit int) (*Registration, error) {
	data, err := io.ReadAll(io.LimitReader(rd, int64(limit)+1))
	if err != nil {
		return nil, fmt.Errorf("cannot read transform file: %w", err)
	}
	r, err := unmarshalLimited(name, data, limit)
	if err != nil {
		return nil, err
	}
	sum := sha256.Sum256(data)
	r.read = Input{Path: name, SHA256: hex.EncodeToString(sum[:])}
	return r, nil
}

// tooLarge is the refusal of a file of more than limit bytes.
func tooLarge(name string, limit int) error {
	return fmt.Errorf("%s: more than %s, more than a transform file holds: not a ferry transform file", name, sizeWords(limit))
}

func sizeWords(n int) string {
	if n >= 1<<20 && n%(1<<20) == 0 {
		return fmt.Sprintf("%d MiB", n>>20)
	}
	return fmt.Sprintf("%d bytes", n)
}

// unmarshalLimited decodes a registration file of at most limit bytes; the
// limit is a parameter so that the fuzz target can reach its path with
// small inputs.
func unmarshalLimited(name string, data []byte, limit int) (*Registration, error) {
	fail := func(format string, a ...any) (*Registration, error) {
		return nil, fmt.Errorf("%s: %s", name, fmt.Sprintf(format, a...))
	}
	if len(data) > limit {
		return nil, tooLarge(name, limit)
	}
	// failAt names the line and column of a JSON error where it has one.
	failAt := func(err error, format string, a ...any) (*Registration, error) {
		if line, col, ok := strictjson.Position(data, err); ok {
			return nil, fmt.Errorf("%s:%d:%d: %s", name, line, col, fmt.Sprintf(format, a...))
		}
		return fail(format, a...)
	}
	// Read the header alone first, so that a newer file says "newer" rather
	// than complaining about fields this reader does not know.
	var head struct {
		Format  string `json:"format"`
		Version int    `json:"version"`
	}
	if err := json.Unmarshal(data, &head); err != nil {
		return failAt(err, "not a ferry transform file (damaged or not JSON: %v)", err)
	}
	if head.Format != FormatName {
		return fail("not a ferry transform file (format %q, want %q)", head.Format, FormatName)
	}
	if head.Version > FormatVersion {
		return fail("transform file version %d is newer than this program reads (%d): use a newer ferry", head.Version, FormatVersion)
	}
	if head.Version < 1 {
		return fail("transform file version %d is not valid", head.Version)
	}
	var w fileJSON
	if err := strictjson.Unmarshal(data, &w); err != nil {
		return failAt(err, "damaged transform file: %v", err)
	}
	want, err := checksum(w)
	if err != nil {
		return fail("damaged transform file: %v", err)
	}
	if w.Checksum != want {
		return fail("damaged transform file: its content does not match its checksum (edited or corrupted after it was written)")
	}
	if w.Units != "micrometre" {
		return fail("units %q, want \"micrometre\"", w.Units)
	}
	for _, v := range []*transform.Vec{w.SourceVoxel, w.TargetVoxel} {
		// The range of the voxel flags (landmarks.MinPerAxisUM to
		// MaxPerAxisUM): a picometre to a metre.
		if v != nil && !(v[0] >= 1e-6 && v[1] >= 1e-6 && v[2] >= 1e-6 && v[0] <= 1e6 && v[1] <= 1e6 && v[2] <= 1e6) {
			return fail("voxel size %v µm: want numbers from 1e-06 to 1e+06 µm", *v)
		}
	}
	t, err := transform.Unmarshal(w.Transform)
	if err != nil {
		return fail("transform: %v", err)
	}
	if t.Kind() != w.Model {
		return fail("model %q but the transform is %q", w.Model, t.Kind())
	}
	r := &Registration{
		Program: w.Program, Transform: t, Smoothing: w.Smoothing,
		Voxels:    Voxels{Source: w.SourceVoxel, Target: w.TargetVoxel},
		Landmarks: w.Landmarks, Refinement: w.Refinement,
	}
	if len(w.Summary) > 0 {
		r.Check = new(CheckJSON)
		if err := json.Unmarshal(w.Summary, r.Check); err != nil {
			return fail("leave-one-out check: %v", err)
		}
	}
	if len(w.Uncertainty) > 0 {
		if r.Uncertainty, err = parseUncertaintyModel(w.Uncertainty, t.Dim()); err != nil {
			return fail("%v", err)
		}
	}
	return r, nil
}
