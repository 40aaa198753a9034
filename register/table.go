package register

import (
	"context"
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"ferry/landmarks"
	"ferry/status"
	"ferry/transform"
)

// Provenance says which inputs, flags and program made an output. It is
// written into the sidecar of every CSV table (see Sidecar) and as a field of
// every JSON and HTML output.
type Provenance struct {
	Command string
	// Inputs are the input files with their SHA-256, in the order given.
	Inputs []Input
	// Flags are the flags that were set, as given.
	Flags []string
}

// Input is one input file and the SHA-256 of its bytes.
type Input struct {
	Path   string `json:"path"`
	SHA256 string `json:"sha256"`
}

// Line is the provenance as one line of text, without a comment mark.
// A path or flag that holds a control character (a line break in a file
// name, say) is written quoted with Go's escapes (strconv.Quote), so that
// the line stays one line and the output can be read back.
func (p Provenance) Line() string {
	var b strings.Builder
	fmt.Fprintf(&b, "ferry %s %s", Version, p.Command)
	for _, in := range p.Inputs {
		fmt.Fprintf(&b, "; %s sha256:%s", OneLine(in.Path), in.SHA256)
	}
	if len(p.Flags) > 0 {
		flags := make([]string, len(p.Flags))
		for i, f := range p.Flags {
			flags[i] = OneLine(f)
		}
		fmt.Fprintf(&b, "; flags: %s", strings.Join(flags, " "))
	}
	return b.String()
}

// OneLine returns s as it is when it holds no control character and is
// valid UTF-8, else quoted with Go's escapes (strconv.Quote): a name with a
// line break in it then takes one line of a file or a message.
func OneLine(s string) string {
	if !utf8.ValidString(s) || strings.IndexFunc(s, unicode.IsControl) >= 0 {
		return strconv.Quote(s)
	}
	return s
}

// formatCoord writes a coordinate or an error in micrometres (or voxels) to
// the tenth of a nanometre, enough for any microscope and stable across
// runs. It refuses a value that is not finite: an output holds numbers a
// reader can use or nothing at all.
func formatCoord(x float64) (string, error) {
	b, err := appendCoord(nil, x)
	return string(b), err
}

// appendCoord is formatCoord appending to dst, for rows built without a
// string a field.
func appendCoord(dst []byte, x float64) ([]byte, error) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return dst, fmt.Errorf("%v is not a finite number", x)
	}
	if x == 0 {
		// Never "-0.0000".
		x = 0
	}
	if b, ok := appendFixed4(dst, x); ok {
		return b, nil
	}
	start := len(dst)
	dst = strconv.AppendFloat(dst, x, 'f', 4, 64)
	if string(dst[start:]) == "-0.0000" {
		dst = append(dst[:start], "0.0000"...)
	}
	return dst, nil
}

// appendFixed4 appends x with four decimals as strconv.AppendFloat(dst,
// x, 'f', 4, 64) does, byte for byte, when it can tell the rounding apart
// from x·10⁴ in floating point: that product is within a relative 2⁻⁵³ of
// the exact one, so unless its fraction lies within that of one half it
// rounds the same way as the exact decimal expansion. Otherwise (a tie or
// near-tie, or a value beyond 10¹⁴) it reports false and the caller asks
// strconv. It writes a mapped table's numbers about three times faster
// than strconv, which must be ready for any precision. "-0.0000" is never
// written: a value that rounds to zero is written "0.0000".
func appendFixed4(dst []byte, x float64) ([]byte, bool) {
	neg := x < 0
	f := math.Abs(x) * 1e4
	if !(f < 1e18) {
		return dst, false
	}
	whole := math.Floor(f)
	frac := f - whole
	// 2⁻⁵⁰ of f bounds the product's rounding error with room to spare.
	if math.Abs(frac-0.5) <= f*0x1p-50 {
		return dst, false
	}
	n := uint64(whole)
	if frac > 0.5 {
		n++
	}
	if neg && n != 0 {
		dst = append(dst, '-')
	}
	var buf [24]byte
	i := len(buf)
	for d := 0; d < 4; d++ {
		i--
		buf[i] = byte('0' + n%10)
		n /= 10
	}
	i--
	buf[i] = '.'
	for {
		i--
		buf[i] = byte('0' + n%10)
		n /= 10
		if n == 0 {
			break
		}
	}
	return append(dst, buf[i:]...), true
}

// appendField appends one text field of a CSV row, quoted as encoding/csv
// quotes it (a comma, a quote or a line break inside, a leading space, the
// field \.) and also when it begins with the comment mark, so that a row
// whose id begins with # is not read back as a comment.
func appendField(dst []byte, f string) []byte {
	lead, _ := utf8.DecodeRuneInString(f)
	needs := f != "" && (f[0] == '#' || f == `\.` || unicode.IsSpace(lead) || strings.ContainsAny(f, ",\"\r\n"))
	if !needs {
		return append(dst, f...)
	}
	dst = append(dst, '"')
	for i := 0; i < len(f); i++ {
		if f[i] == '"' {
			dst = append(dst, '"')
		}
		dst = append(dst, f[i])
	}
	return append(dst, '"')
}

// MappedLayout is the column layout of a mapped-cells table.
type MappedLayout struct {
	// Header is every column, in order.
	Header []string
	// Frame is FrameTarget for cells mapped forward, FrameSource for cells
	// mapped back with --inverse.
	Frame string
	// Coordinates describe the position columns: x, y, z in the units
	// given, and target_x_um… (or source_x_um…) in micrometres.
	Coordinates []Coordinates
}

// NewMappedLayout is the layout of the table of cells mapped into frame,
// written in voxels of voxel (nil: micrometres).
func NewMappedLayout(cells *landmarks.PointSet, frame string, voxel *transform.Vec) MappedLayout {
	axes := []string{"x", "y", "z"}[:cells.Dim]
	l := MappedLayout{Frame: frame}
	l.Header = append([]string{"id"}, axes...)
	for _, a := range axes {
		l.Header = append(l.Header, "sd_"+a+"_um")
	}
	l.Header = append(l.Header, "r95_um", "status")
	l.Coordinates = []Coordinates{CoordinatesIn(axes, frame, voxel)}
	um := make([]string, len(axes))
	for k, a := range axes {
		um[k] = frame + "_" + a + "_um"
	}
	l.Header = append(l.Header, um...)
	l.Coordinates = append(l.Coordinates, CoordinatesIn(um, frame, nil))
	// A kept column named like one of ours (a map of a map's output) is
	// renamed, as every writer does (landmarks.KeptColumnNames).
	l.Header = append(l.Header, landmarks.KeptColumnNames(l.Header, cells.ExtraColumns)...)
	return l
}

// WriteMappedTable writes the mapped cells to path with their sidecar,
// whole or not at all: the table of WriteMapped, and prov with the frame
// and units of its position columns beside it.
func WriteMappedTable(ctx context.Context, path string, prov Provenance, cells *landmarks.PointSet, mapped []Mapped, frame string, voxel *transform.Vec) error {
	layout := NewMappedLayout(cells, frame, voxel)
	return WriteTable(ctx, path, prov, layout.Coordinates, func(w io.Writer) error {
		return WriteMapped(w, cells, mapped, layout, voxel)
	})
}

// WriteMapped writes the mapped cells in the columns of docs/formats.md, header
// row first: id, x, y, z (mapped, in micrometres or, when voxel is not nil,
// in voxels of that size), sd_x_um, sd_y_um, sd_z_um, r95_um, status, the
// position again in micrometres under names that say its frame
// (target_x_um… or source_x_um…, see MappedLayout), then the cells' own
// extra columns. A point without an inverse has empty position and error
// fields. A value that is not finite stops the writing with an error naming
// the cell, its line in the cells file and the column.
func WriteMapped(w io.Writer, cells *landmarks.PointSet, mapped []Mapped, layout MappedLayout, voxel *transform.Vec) error {
	cw := csv.NewWriter(w)
	header := layout.Header
	if err := cw.Write(header); err != nil {
		return err
	}
	cw.Flush()
	if err := cw.Error(); err != nil {
		return err
	}
	// Rows are built as bytes: a million-cell table would otherwise make
	// seven strings a row only to copy them. They go to w some hundreds at
	// a time, each row whole, and the rows before a faulty one are written
	// before the error is returned, as row by row.
	const flushAt = 1 << 15
	var line []byte
	for i, c := range cells.Points {
		m := mapped[i]
		if len(line) >= flushAt {
			if _, err := w.Write(line); err != nil {
				return err
			}
			line = line[:0]
		}
		row := len(line)
		line = appendField(line, c.ID)
		if m.Status == status.NoInverse {
			for range 2*cells.Dim + 1 {
				line = append(line, ',')
			}
		} else {
			var buf [7]float64 // x, y, z, three sds and r95
			values := buf[:0]
			for k := range cells.Dim {
				v := m.Pos[k]
				if voxel != nil {
					v /= voxel[k]
				}
				values = append(values, v)
			}
			values = append(values, m.SD[:cells.Dim]...)
			values = append(values, m.R95)
			for k, v := range values {
				line = append(line, ',')
				var err error
				if line, err = appendCoord(line, v); err != nil {
					if _, werr := w.Write(line[:row]); werr != nil {
						return werr
					}
					return &landmarks.InputError{File: cells.Path, Line: c.Line, Column: header[1+k],
						Msg: fmt.Sprintf("cell %s: the mapped value %v", strconv.Quote(c.ID), err)}
				}
			}
		}
		line = append(line, ',')
		line = appendField(line, string(m.Status))
		for k := range cells.Dim {
			line = append(line, ',')
			if m.Status == status.NoInverse {
				continue
			}
			// Finite: the same value passed above.
			line, _ = appendCoord(line, m.Pos[k])
		}
		for _, e := range c.Extra {
			line = append(line, ',')
			line = appendField(line, e)
		}
		line = append(line, '\n')
	}
	_, err := w.Write(line)
	return err
}

// FormatCounts lists status counts in the order of seriousness.
func FormatCounts(counts map[status.Status]int) string {
	var parts []string
	for _, s := range status.Mapping() {
		if n := counts[s]; n > 0 {
			parts = append(parts, fmt.Sprintf("%d %s", n, s))
		}
	}
	return strings.Join(parts, ", ")
}
