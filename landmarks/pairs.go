package landmarks

import (
	"errors"
	"fmt"
	"io"
	"strings"

	"ferry/internal/errkind"
	"ferry/transform"
)

// Kind says what structure a landmark marks.
type Kind string

// The landmark kinds (docs/formats.md).
const (
	KindVessel Kind = "vessel" // a branch point of a blood vessel
	KindSoma   Kind = "soma"   // a cell body
	KindOther  Kind = "other"  // anything else, and an empty kind column
)

// parseKind reads a kind column: one of the kinds in any case, or empty for
// KindOther.
func parseKind(s string) (Kind, bool) {
	s = strings.TrimSpace(s)
	switch {
	case s == "", strings.EqualFold(s, string(KindOther)):
		return KindOther, true
	case strings.EqualFold(s, string(KindVessel)):
		return KindVessel, true
	case strings.EqualFold(s, string(KindSoma)):
		return KindSoma, true
	}
	return "", false
}

// Pair is one landmark: the same structure seen in the source and in the
// target space.
type Pair struct {
	ID   string
	Kind Kind
	// Source and Target are the positions, in micrometres (or voxel
	// indices until ScaleVoxels is called). Z is zero in 2-D.
	Source, Target transform.Vec
	// Line is the physical line of the file the pair was read from.
	Line int
	// Extra holds the row's values of the set's ExtraColumns, as read.
	Extra []string
}

// PairSet is a landmark file as read.
type PairSet struct {
	// Path is the file name as the user gave it.
	Path string
	// Dim is 3, or 2 when the file has no z columns.
	Dim   int
	Pairs []Pair
	// ExtraColumns names the columns beyond the required ones, in file
	// order, as spelt in the header.
	ExtraColumns []string
	// SHA256 is the hex SHA-256 of the raw bytes of the file.
	SHA256 string
}

// The columns of a landmark file.
var pairColumns2D = []string{"id", "kind", "source_x", "source_y", "target_x", "target_y"}

// ReadPairs reads and checks the landmark file at path. Every fault of the
// file is reported as an *InputError.
func ReadPairs(path string) (*PairSet, error) {
	return parseFile(path, ParsePairs)
}

// ParsePairs reads and checks a landmark table from r; name is the file name
// used in messages and in PairSet.Path. Every fault of the table is reported
// as an *InputError.
func ParsePairs(name string, r io.Reader) (*PairSet, error) {
	t, err := openTable(name, r)
	if err != nil {
		return nil, err
	}
	hint := ""
	if t.column("x") >= 0 && t.column("source_x") < 0 {
		hint = "this looks like a cells or candidates table, not landmark pairs"
	}
	cols, err := t.require(hint, pairColumns2D...)
	if err != nil {
		return nil, err
	}
	idCol, kindCol := cols[0], cols[1]
	srcCols := []int{cols[2], cols[3], -1}
	dstCols := []int{cols[4], cols[5], -1}
	srcZ, dstZ := t.column("source_z"), t.column("target_z")
	dim := 3
	switch {
	case srcZ < 0 && dstZ < 0:
		dim = 2
	case srcZ < 0:
		return nil, &InputError{File: name, Line: t.headerLine, Column: "source_z",
			Msg: fmt.Sprintf("missing while %s is present: give both z columns for 3-D landmarks or neither for 2-D", t.header[dstZ])}
	case dstZ < 0:
		return nil, &InputError{File: name, Line: t.headerLine, Column: "target_z",
			Msg: fmt.Sprintf("missing while %s is present: give both z columns for 3-D landmarks or neither for 2-D", t.header[srcZ])}
	default:
		srcCols[2], dstCols[2] = srcZ, dstZ
		cols = append(cols, srcZ, dstZ)
	}
	extraCols := t.extras(cols...)

	set := &PairSet{Path: name, Dim: dim, ExtraColumns: t.names(extraCols)}
	seen := make(map[string]int)
	var block stringBlock
	for {
		ok, err := t.nextRow()
		if err != nil {
			return nil, err
		}
		if !ok {
			break
		}
		p := Pair{Line: t.line(0)}
		if p.ID, err = t.id(idCol, seen); err != nil {
			return nil, err
		}
		var known bool
		if p.Kind, known = parseKind(t.record[kindCol]); !known {
			return nil, t.fail(kindCol, quote(strings.TrimSpace(t.record[kindCol]))+" is not a landmark kind: want vessel, soma or other")
		}
		for a := range dim {
			if p.Source[a], err = t.number(srcCols[a]); err != nil {
				return nil, err
			}
		}
		for a := range dim {
			if p.Target[a], err = t.number(dstCols[a]); err != nil {
				return nil, err
			}
		}
		p.Extra = t.extraValues(&block, extraCols, &p.ID)
		seen[p.ID] = p.Line
		set.Pairs = append(set.Pairs, p)
		set.Pairs, seen = sized(t, set.Pairs, seen)
	}
	if len(set.Pairs) == 0 {
		return nil, &InputError{File: name, Msg: "no landmark pairs: the header is not followed by any rows"}
	}
	set.SHA256 = t.text.SHA256()
	return set, nil
}

// ScaleVoxels turns voxel indices into micrometres, in place: each source
// coordinate is multiplied by the source voxel size src along its axis, each
// target coordinate by dst. Call it once, right after reading.
func (s *PairSet) ScaleVoxels(src, dst transform.Vec) {
	for i := range s.Pairs {
		p := &s.Pairs[i]
		for a := range 3 {
			p.Source[a] *= src[a]
			p.Target[a] *= dst[a]
		}
	}
}

// ErrExclusion is matched (errors.Is) by the errors of Exclude: an id that
// the set does not hold, or a list that leaves no pair.
var ErrExclusion = errors.New("cannot leave out these landmarks")

// Exclude returns a copy of s without the pairs whose ids are listed. It is
// an error (ErrExclusion) to name an id that s does not hold or to exclude
// every pair.
func (s *PairSet) Exclude(ids []string) (*PairSet, error) {
	held := make(map[string]bool, len(s.Pairs))
	for _, p := range s.Pairs {
		held[p.ID] = true
	}
	drop := make(map[string]bool, len(ids))
	for _, id := range ids {
		if !held[id] {
			return nil, errkind.New(ErrExclusion, "no landmark with id %s in %s", quote(id), s.fileName())
		}
		drop[id] = true
	}
	out := *s
	out.Pairs = make([]Pair, 0, len(s.Pairs))
	for _, p := range s.Pairs {
		if !drop[p.ID] {
			out.Pairs = append(out.Pairs, p)
		}
	}
	if len(out.Pairs) == 0 {
		return nil, errkind.New(ErrExclusion, "excludes all %d landmark pairs of %s", len(s.Pairs), s.fileName())
	}
	return &out, nil
}

func (s *PairSet) fileName() string {
	if s.Path == "" {
		return "the landmark file"
	}
	return s.Path
}

// Sources returns the source positions, in file order.
func (s *PairSet) Sources() []transform.Vec {
	v := make([]transform.Vec, len(s.Pairs))
	for i, p := range s.Pairs {
		v[i] = p.Source
	}
	return v
}

// Targets returns the target positions, in file order.
func (s *PairSet) Targets() []transform.Vec {
	v := make([]transform.Vec, len(s.Pairs))
	for i, p := range s.Pairs {
		v[i] = p.Target
	}
	return v
}

// IDs returns the ids, in file order.
func (s *PairSet) IDs() []string {
	v := make([]string, len(s.Pairs))
	for i, p := range s.Pairs {
		v[i] = p.ID
	}
	return v
}

// Kinds returns the kinds, in file order.
func (s *PairSet) Kinds() []Kind {
	v := make([]Kind, len(s.Pairs))
	for i, p := range s.Pairs {
		v[i] = p.Kind
	}
	return v
}
