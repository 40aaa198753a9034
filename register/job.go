package register

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"math"
	"os"

	"ferry/landmarks"
	"ferry/transform"
)

// Voxels are the voxel sizes (µm per voxel) of the two sides; nil means the
// coordinates are micrometres already.
type Voxels struct {
	Source, Target *transform.Vec
}

// PrepareLandmarks removes the excluded ids from a landmark file as read and
// turns voxel indices into micrometres, leaving set itself as it was.
func PrepareLandmarks(set *landmarks.PairSet, exclude []string, vox Voxels) (*Problem, error) {
	kept, err := set.Exclude(exclude)
	if err != nil {
		return nil, err
	}
	if vox.Source != nil || vox.Target != nil {
		one := transform.Vec{1, 1, 1}
		src, dst := one, one
		if vox.Source != nil {
			src = *vox.Source
		}
		if vox.Target != nil {
			dst = *vox.Target
		}
		kept.ScaleVoxels(src, dst)
	}
	for _, pr := range kept.Pairs {
		for _, side := range []struct {
			prefix string
			pos    transform.Vec
		}{{"source_", pr.Source}, {"target_", pr.Target}} {
			if err := checkMagnitude(set.Path, pr.Line, side.prefix, side.pos, set.Dim); err != nil {
				return nil, err
			}
		}
	}
	return NewProblem(kept), nil
}

// MaxCoordinateUM bounds every coordinate ferry takes, in micrometres once
// voxel sizes are applied: a kilometre, beyond any microscope's stage. A
// larger value is a unit or column slip, and squares of distances between
// such points would overflow (near 1e154 µm) or drown every micrometre in
// rounding long before.
const MaxCoordinateUM = 1e9

// checkMagnitude refuses a position beyond MaxCoordinateUM, naming the file,
// the line and the column (prefix + axis, e.g. source_x).
func checkMagnitude(file string, line int, prefix string, pos transform.Vec, dim int) error {
	for k := range dim {
		if math.Abs(pos[k]) > MaxCoordinateUM {
			return &landmarks.InputError{File: file, Line: line, Column: prefix + string("xyz"[k]),
				Msg: fmt.Sprintf("%g µm is beyond the ±%g µm (a kilometre) of any microscope: is the column in micrometres or voxels?", pos[k], MaxCoordinateUM)}
		}
	}
	return nil
}

// FileSHA256 is the hex SHA-256 of a file's bytes, for provenance.
func FileSHA256(path string) (string, error) {
	f, err := os.Open(path)
	if err != nil {
		return "", fmt.Errorf("cannot read %s: %w", path, err)
	}
	defer f.Close()
	h := sha256.New()
	if _, err := io.Copy(h, f); err != nil {
		return "", fmt.Errorf("cannot read %s: %w", path, err)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// TransformFile puts a checked fit into a transform file.
func TransformFile(set *landmarks.PairSet, p *Problem, a *Assessment, s Settings, vox Voxels, exclude []string, prov Provenance) (*transform.File, error) {
	summary, err := a.SummaryJSON(prov)
	if err != nil {
		return nil, err
	}
	unc, err := NewUncertaintyModel(p, a, s).Marshal()
	if err != nil {
		return nil, err
	}
	if exclude == nil {
		exclude = []string{}
	}
	return &transform.File{
		Program:     "ferry " + Version,
		Units:       "micrometre",
		SourceVoxel: vox.Source, TargetVoxel: vox.Target,
		Landmarks:   transform.Provenance{Path: set.Path, SHA256: set.SHA256, Excluded: exclude},
		Transform:   a.Result.Transform,
		Smoothing:   a.Smoothing,
		Summary:     summary,
		Uncertainty: unc,
	}, nil
}

// ReadCells reads a cells (or candidates) file for a transform file: in the
// voxels of the side it lives on when the transform was fitted in voxels.
// It refuses a table whose dimension is not the transform's.
func ReadCells(path, what string, f *transform.File, targetSide bool) (*landmarks.PointSet, []transform.Vec, error) {
	set, err := landmarks.ReadPoints(path, what)
	if err != nil {
		return nil, nil, err
	}
	if set.Dim != f.Transform.Dim() {
		return nil, nil, fmt.Errorf("%s: %d-D %s for a %d-D transform", path, set.Dim, what, f.Transform.Dim())
	}
	vox := f.SourceVoxel
	if targetSide {
		vox = f.TargetVoxel
	}
	pos := make([]transform.Vec, len(set.Points))
	for i, p := range set.Points {
		pos[i] = p.Pos
		if vox != nil {
			for k := range set.Dim {
				pos[i][k] *= vox[k]
			}
		}
		if err := checkMagnitude(path, p.Line, "", pos[i], set.Dim); err != nil {
			return nil, nil, err
		}
	}
	return set, pos, nil
}
