package transform

import (
	"encoding/json"
	"errors"
	"fmt"

	"ferry/internal/strictjson"
)

// Marshal encodes t as JSON: its model and the parameters of that model, or
// the steps of a chain. A parameter that is not a finite number is refused,
// so that an encoded transform always decodes. This is the "transform"
// object of a registration file (package register writes the file around
// it; docs/formats.md).
func Marshal(t Transform) (json.RawMessage, error) {
	if t == nil {
		return nil, errors.New("no transform to encode")
	}
	return encodeTransform(t)
}

// Unmarshal decodes a transform as Marshal encodes it. It refuses fields it
// does not know and parameters that do not make a valid transform; the
// transform it returns is ready to use (a spline's caches are filled).
func Unmarshal(data []byte) (Transform, error) {
	return decodeTransform(data, 0)
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
	if err := strictjson.Unmarshal(raw, &w); err != nil {
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
		if err := w.Spline.Validate(); err != nil {
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
