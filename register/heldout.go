package register

import (
	"encoding/json"
	"fmt"

	"ferry/transform"
)

// HeldOut is the prediction of one point that a refined transform was
// fitted to (a cell whose correspondence became a node of the spline), made
// from every other node: its exact leave-one-out prediction. Map and match
// judge such a cell by it, so that its own correspondence does not vouch for
// it. Refine also records a soma that is not a node when the nearby pairs'
// held-out errors widen its factor; its prediction is then the transform's
// own.
type HeldOut struct {
	// ID names the cell.
	ID string `json:"id"`
	// Source is the cell's position as fitted (source µm); a point mapped
	// from exactly this position is judged by the held-out prediction.
	Source transform.Vec `json:"source_um"`
	// Predicted is the target position (µm) predicted without the cell's
	// own correspondence.
	Predicted transform.Vec `json:"predicted_um"`
	// Factor is the prediction factor of Predicted along each target axis,
	// in the units of the uncertainty model's scale: the covariance of the
	// prediction as an estimate of the true map there is diagonal, s_k·Factor_k
	// along axis k.
	Factor transform.Vec `json:"factor"`
}

// heldOutRecord is the part of a transform file's refinement record that
// map and match read; the rest is for people and the report.
type heldOutRecord struct {
	HeldOut []HeldOut `json:"held_out"`
}

// parseHeldOut reads the held-out predictions of a refinement record (none
// without one), keyed by their exact source position.
func parseHeldOut(raw json.RawMessage, dim int) (map[transform.Vec]HeldOut, error) {
	if len(raw) == 0 {
		return nil, nil
	}
	var rec heldOutRecord
	if err := json.Unmarshal(raw, &rec); err != nil {
		return nil, fmt.Errorf("refinement record: %v", err)
	}
	out := make(map[transform.Vec]HeldOut, len(rec.HeldOut))
	for i, h := range rec.HeldOut {
		if !h.Source.IsFinite() || !h.Predicted.IsFinite() || !h.Factor.IsFinite() {
			return nil, fmt.Errorf("refinement record: held-out prediction %d (%q) is not finite", i+1, h.ID)
		}
		for k := range dim {
			if !(h.Factor[k] >= 0) {
				return nil, fmt.Errorf("refinement record: held-out prediction %d (%q) has a negative factor", i+1, h.ID)
			}
		}
		if dim == 2 {
			h.Source[2], h.Predicted[2] = 0, 0
		}
		out[h.Source] = h
	}
	return out, nil
}
