package transform

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
)

// MaxFileBytes bounds the size of a transform file a reader takes: 64 MiB.
// A file holds about 540 bytes per landmark (measured on splines of 500 and
// 1 000 landmarks), so the limit allows some 120 000 landmarks, far more
// than a spline ferry would fit: its dense system alone would need 6 n² × 8
// bytes, 700 GB. A larger file (a gigabyte of whitespace, say) is refused
// before it is read, instead of taking the memory and a minute to parse.
const MaxFileBytes = 64 << 20

// FormatName and FormatVersion identify the transform file. A reader refuses
// another name and any version newer than its own.
const (
	FormatName    = "ferry-transform"
	FormatVersion = 1
)

// File is the transform file: the fitted transform with everything needed to
// use and to audit it. transform/ owns its layout; the registration layer
// fills Summary and Uncertainty, which this package keeps as opaque JSON.
type File struct {
	// Program is the version of the program that wrote the file.
	Program string
	// Units of every position and error: always "micrometre".
	Units string
	// SourceVoxel and TargetVoxel, when set, say that the landmark
	// coordinates were voxel indices of that size in micrometres.
	SourceVoxel, TargetVoxel *Vec
	// Landmarks says which landmark file the transform was fitted from.
	Landmarks Provenance
	// Transform maps source micrometres to target micrometres.
	Transform Transform
	// Smoothing is the thin-plate-spline S used (0 for the other models).
	Smoothing float64
	// Summary is the leave-one-out summary, Uncertainty the model of the
	// prediction error that map and match need; both as the registration
	// layer encodes them.
	Summary, Uncertainty json.RawMessage
	// Refinement, when set, says how the transform was refined with
	// correspondences beyond the landmarks (ferry refine), with what map
	// and match need to judge the cells behind them honestly; the
	// registration layer encodes it.
	Refinement json.RawMessage
}

// Provenance names the landmark file behind a transform.
type Provenance struct {
	Path     string   `json:"path"`
	SHA256   string   `json:"sha256"`
	Excluded []string `json:"excluded_ids"`
}

// fileJSON is the wire layout. The checksum covers the compact encoding of
// every other field, so that a file damaged after writing (a truncated copy, a
// changed number) is refused rather than silently used.
type fileJSON struct {
	Format      string          `json:"format"`
	Version     int             `json:"version"`
	Program     string          `json:"program"`
	Units       string          `json:"units"`
	SourceVoxel *Vec            `json:"source_voxel_um,omitempty"`
	TargetVoxel *Vec            `json:"target_voxel_um,omitempty"`
	Landmarks   Provenance      `json:"landmarks"`
	Model       Kind            `json:"model"`
	Smoothing   float64         `json:"smoothing"`
	Transform   json.RawMessage `json:"transform"`
	Summary     json.RawMessage `json:"leave_one_out,omitempty"`
	Uncertainty json.RawMessage `json:"uncertainty,omitempty"`
	Refinement  json.RawMessage `json:"refinement,omitempty"`
	Checksum    string          `json:"content_sha256"`
}

// wireTransform is one transform on the wire: its model and the parameters
// of that model, or the steps of a chain.
type wireTransform struct {
	Model  Kind              `json:"model"`
	Linear *Linear           `json:"linear,omitempty"`
	Spline *Spline           `json:"spline,omitempty"`
	Steps  []json.RawMessage `json:"steps,omitempty"`
}

func encodeTransform(t Transform) (json.RawMessage, error) {
	w := wireTransform{Model: t.Kind()}
	switch t := t.(type) {
	case *Linear:
		if !finiteMat(t.A) || !t.T.IsFinite() || !finite(t.Scale) {
			return nil, fmt.Errorf("%s transform: a parameter is not a finite number (matrix %v, offset %v µm, scale %v)", t.Model, t.A, t.T, t.Scale)
		}
		w.Linear = t
	case *Spline:
		if err := t.finiteParameters(); err != nil {
			return nil, err
		}
		w.Spline = t
	case *Chain:
		for _, s := range t.Steps {
			raw, err := encodeTransform(s)
			if err != nil {
				return nil, err
			}
			w.Steps = append(w.Steps, raw)
		}
	default:
		return nil, fmt.Errorf("transform of type %T cannot be written to a file", t)
	}
	return json.Marshal(w)
}

// finiteParameters names the first parameter of s that is not a finite
// number: a transform file never holds one.
func (s *Spline) finiteParameters() error {
	for i := range s.Nodes {
		if !s.Nodes[i].IsFinite() {
			return fmt.Errorf("thin-plate spline: node %d is at %v µm, not a finite position", i+1, s.Nodes[i])
		}
	}
	for i := range s.Weights {
		if !s.Weights[i].IsFinite() {
			return fmt.Errorf("thin-plate spline: the kernel weight of node %d is %v, not finite", i+1, s.Weights[i])
		}
	}
	for _, w := range s.PairWeights {
		if !finite(w) {
			return fmt.Errorf("thin-plate spline: a pair weight is %v, not finite", w)
		}
	}
	if !finiteMat(s.Matrix) || !s.Offset.IsFinite() || !s.Centre.IsFinite() || !finite(s.Scale) || !finite(s.Smoothing) {
		return fmt.Errorf("thin-plate spline: its affine part, centre, scale or smoothing is not a finite number")
	}
	return nil
}

func finiteMat(m Mat) bool {
	for i := range 3 {
		for j := range 3 {
			if !finite(m[i][j]) {
				return false
			}
		}
	}
	return true
}

func decodeTransform(raw json.RawMessage, depth int) (Transform, error) {
	if depth > 8 {
		return nil, errors.New("chains nested more than 8 deep")
	}
	var w wireTransform
	if err := strictUnmarshal(raw, &w); err != nil {
		return nil, err
	}
	var t Transform
	switch w.Model {
	case Translation, Rigid, Similarity, Affine:
		if w.Linear == nil {
			return nil, fmt.Errorf("%s transform without its parameters", w.Model)
		}
		if w.Linear.Model != w.Model {
			return nil, fmt.Errorf("model %q holds parameters of model %q", w.Model, w.Linear.Model)
		}
		if err := w.Linear.validate(); err != nil {
			return nil, err
		}
		t = w.Linear
	case TPS:
		if w.Spline == nil {
			return nil, errors.New("tps transform without its parameters")
		}
		if err := w.Spline.validate(); err != nil {
			return nil, err
		}
		t = w.Spline
	case ChainKind:
		steps := make([]Transform, len(w.Steps))
		for i, s := range w.Steps {
			var err error
			if steps[i], err = decodeTransform(s, depth+1); err != nil {
				return nil, fmt.Errorf("chain step %d: %w", i+1, err)
			}
		}
		c, err := NewChain(steps...)
		if err != nil {
			return nil, err
		}
		t = c
	default:
		return nil, fmt.Errorf("unknown model %q", w.Model)
	}
	return t, nil
}

// Marshal encodes f as indented JSON with its checksum.
func (f *File) Marshal() ([]byte, error) {
	if f.Transform == nil {
		return nil, errors.New("transform file without a transform")
	}
	raw, err := encodeTransform(f.Transform)
	if err != nil {
		return nil, err
	}
	units := f.Units
	if units == "" {
		units = "micrometre"
	}
	w := fileJSON{
		Format: FormatName, Version: FormatVersion, Program: f.Program, Units: units,
		SourceVoxel: f.SourceVoxel, TargetVoxel: f.TargetVoxel, Landmarks: f.Landmarks,
		Model: f.Transform.Kind(), Smoothing: f.Smoothing, Transform: raw,
		Summary: f.Summary, Uncertainty: f.Uncertainty, Refinement: f.Refinement,
	}
	if w.Landmarks.Excluded == nil {
		w.Landmarks.Excluded = []string{}
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

func checksum(w fileJSON) (string, error) {
	w.Checksum = ""
	b, err := json.Marshal(w)
	if err != nil {
		return "", err
	}
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:]), nil
}

// Unmarshal decodes a transform file. name is used in messages only. It
// refuses a file of another format, of a newer version, with fields it does
// not know, with a checksum that does not match, or with parameters that do
// not make a valid transform.
func Unmarshal(name string, data []byte) (*File, error) {
	return unmarshalLimited(name, data, MaxFileBytes)
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

// unmarshalLimited is Unmarshal with the size limit given, so that the fuzz
// target can reach the limit's path with small inputs.
func unmarshalLimited(name string, data []byte, limit int) (*File, error) {
	fail := func(format string, a ...any) (*File, error) {
		return nil, fmt.Errorf("%s: %s", name, fmt.Sprintf(format, a...))
	}
	if len(data) > limit {
		return nil, tooLarge(name, limit)
	}
	// failAt names the line and column of a JSON error where it has one.
	failAt := func(err error, format string, a ...any) (*File, error) {
		if line, col, ok := jsonPosition(data, err); ok {
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
	if err := strictUnmarshal(data, &w); err != nil {
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
	for _, v := range []*Vec{w.SourceVoxel, w.TargetVoxel} {
		// The range of the voxel flags (landmarks.MinPerAxisUM to
		// MaxPerAxisUM): a picometre to a metre.
		if v != nil && !(v[0] >= 1e-6 && v[1] >= 1e-6 && v[2] >= 1e-6 && v[0] <= 1e6 && v[1] <= 1e6 && v[2] <= 1e6) {
			return fail("voxel size %v µm: want numbers from 1e-06 to 1e+06 µm", *v)
		}
	}
	t, err := decodeTransform(w.Transform, 0)
	if err != nil {
		return fail("transform: %v", err)
	}
	if t.Kind() != w.Model {
		return fail("model %q but the transform is %q", w.Model, t.Kind())
	}
	return &File{
		Program: w.Program, Units: w.Units, SourceVoxel: w.SourceVoxel, TargetVoxel: w.TargetVoxel,
		Landmarks: w.Landmarks, Transform: t, Smoothing: w.Smoothing,
		Summary: w.Summary, Uncertainty: w.Uncertainty, Refinement: w.Refinement,
	}, nil
}

// ReadFile reads and decodes the transform file at path. A file larger than
// MaxFileBytes is refused before it is read; from a pipe or a device, no
// more than that is read.
func ReadFile(path string) (*File, error) {
	return readFileLimited(path, MaxFileBytes)
}

func readFileLimited(path string, limit int) (*File, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("cannot read transform file: %w", err)
	}
	defer f.Close()
	if info, err := f.Stat(); err == nil && info.Mode().IsRegular() && info.Size() > int64(limit) {
		return nil, tooLarge(path, limit)
	}
	data, err := io.ReadAll(io.LimitReader(f, int64(limit)+1))
	if err != nil {
		return nil, fmt.Errorf("cannot read transform file: %w", err)
	}
	if len(data) > limit {
		return nil, tooLarge(path, limit)
	}
	return unmarshalLimited(path, data, limit)
}

// jsonPosition is the line and column (from 1, in bytes) of a JSON syntax
// or type error in data.
func jsonPosition(data []byte, err error) (line, col int, ok bool) {
	var offset int64
	var syntax *json.SyntaxError
	var typ *json.UnmarshalTypeError
	switch {
	case errors.As(err, &syntax):
		offset = syntax.Offset
	case errors.As(err, &typ):
		offset = typ.Offset
	default:
		return 0, 0, false
	}
	if offset < 0 || offset > int64(len(data)) {
		return 0, 0, false
	}
	before := data[:offset]
	line = 1 + bytes.Count(before, []byte{'\n'})
	col = int(offset) - (bytes.LastIndexByte(before, '\n') + 1)
	if col < 1 {
		col = 1
	}
	return line, col, true
}

func strictUnmarshal(data []byte, v any) error {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if err := dec.Decode(v); err != nil {
		return err
	}
	if dec.More() {
		return errors.New("data after the end of the JSON object")
	}
	return nil
}
