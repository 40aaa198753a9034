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
	p := NewProblem(kept)
	p.From = LandmarkSource{Path: set.Path, SHA256: set.SHA256, Excluded: append([]string(nil), exclude...)}
	p.Voxels = vox
	return p, nil
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

// ReadCells reads a cells (or candidates) file for a registration: in the
// voxels of the side it lives on when the transform was fitted in voxels.
// It refuses a table whose dimension is not the transform's.
func ReadCells(path, what string, f *Registration, targetSide bool) (*landmarks.PointSet, []transform.Vec, error) {
	set, err := landmarks.ReadPoints(path, what)
	if err != nil {
		return nil, nil, err
	}
	if set.Dim != f.Transform.Dim() {
		return nil, nil, fmt.Errorf("%s: %d-D %s for a %d-D transform", path, set.Dim, what, f.Transform.Dim())
	}
	vox := f.Voxels.Source
	if targetSide {
		vox = f.Voxels.Target
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

// PairsInput is a landmark file as ReadPairs read it, for a Provenance: its
// path and the SHA-256 of the bytes read, never of the file read again.
func PairsInput(set *landmarks.PairSet) Input { return Input{Path: set.Path, SHA256: set.SHA256} }

// PointsInput is a cells or candidates file as ReadPoints read it, for a
// Provenance.
func PointsInput(set *landmarks.PointSet) Input { return Input{Path: set.Path, SHA256: set.SHA256} }

// MappingJob is a registration with cells to map through it: what map,
// match and review read before they map.
type MappingJob struct {
	// Registration is the registration read; Path names its file.
	Registration *Registration
	Path         string
	// Cells are the cells as read, Pos their positions in micrometres (in
	// the source, or the target when Inverse).
	Cells   *landmarks.PointSet
	Pos     []transform.Vec
	Inverse bool
	// Mapper, once Prepare has run, maps through the registration.
	Mapper *Mapper
}

// LoadMapping reads the registration file at path and the cells file (in
// the target when inverse, else the source), after making sure that
// preparing the mapping fits the machine's memory. Prepare builds the
// mapper; the two are apart so that a caller can check its own inputs
// against the cells before the seconds a large spline's mapper takes.
func LoadMapping(path, cellsPath string, inverse bool) (*MappingJob, error) {
	r, err := ReadRegistrationFile(path)
	if err != nil {
		return nil, err
	}
	if err := EstimateMapping(r).CheckMemory(AvailableMemory()); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	j := &MappingJob{Registration: r, Path: path, Inverse: inverse}
	if j.Cells, j.Pos, err = ReadCells(cellsPath, "cells", r, inverse); err != nil {
		return nil, err
	}
	return j, nil
}

// Prepare builds the job's mapper.
func (j *MappingJob) Prepare() error {
	m, err := NewMapper(j.Registration)
	if err != nil {
		return fmt.Errorf("%s: %w", j.Path, err)
	}
	j.Mapper = m
	return nil
}

// Candidates reads a candidates file in the registration's target units.
func (j *MappingJob) Candidates(path string) (*landmarks.PointSet, []transform.Vec, error) {
	return ReadCells(path, "candidates", j.Registration, true)
}

// Frame is the frame of the mapped positions and their voxel size when the
// registration was fitted in voxels: the target's, or the source's when
// the job maps back.
func (j *MappingJob) Frame() (frame string, voxel *transform.Vec) {
	if j.Inverse {
		return FrameSource, j.Registration.Voxels.Source
	}
	return FrameTarget, j.Registration.Voxels.Target
}

// Provenance is the provenance of an output of command made from the job:
// the registration file and the cells file as they were read, then more.
func (j *MappingJob) Provenance(command string, flags []string, more ...Input) Provenance {
	inputs := append([]Input{j.Registration.Input(), PointsInput(j.Cells)}, more...)
	return Provenance{Command: command, Inputs: inputs, Flags: flags}
}
