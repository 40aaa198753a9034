package export

import (
	"fmt"
	"strconv"
	"strings"

	"ferry/transform"
)

// Convention is the sentence every export states beside its matrices.
const Convention = "input = source (in vivo) side, output = target (EM) side; column vectors: [x' y' z' 1]ᵀ = M·[x y z 1]ᵀ, i.e. x' = A·x + t"

// Homogeneous is a 4×4 homogeneous matrix [A t; 0 0 0 1] acting on column
// vectors (x, y, z, 1). In 2-D the z row and column are those of the
// identity.
type Homogeneous [4][4]float64

// NewHomogeneous is the matrix of x' = A·x + t.
func NewHomogeneous(a transform.Mat, t transform.Vec) Homogeneous {
	var h Homogeneous
	for i := range 3 {
		for j := range 3 {
			h[i][j] = a[i][j]
		}
		h[i][3] = t[i]
	}
	h[3][3] = 1
	return h
}

// Linear returns A and t.
func (h Homogeneous) Linear() (transform.Mat, transform.Vec) {
	var a transform.Mat
	var t transform.Vec
	for i := range 3 {
		for j := range 3 {
			a[i][j] = h[i][j]
		}
		t[i] = h[i][3]
	}
	return a, t
}

// InVoxels is the same map between voxel indices: source voxel index v
// (position v·sv µm) to target voxel index (position / tv). A nil size
// leaves that side in micrometres.
func (h Homogeneous) InVoxels(source, target *transform.Vec) Homogeneous {
	a, t := h.Linear()
	var out Homogeneous
	for i := range 3 {
		inv := 1.0
		if target != nil {
			inv = 1 / target[i]
		}
		for j := range 3 {
			s := 1.0
			if source != nil {
				s = source[j]
			}
			out[i][j] = inv * a[i][j] * s
		}
		out[i][3] = inv * t[i]
	}
	out[3][3] = 1
	return out
}

// Rows is the matrix as nested slices, for JSON.
func (h Homogeneous) Rows() [][]float64 {
	rows := make([][]float64, 4)
	for i := range h {
		rows[i] = append([]float64(nil), h[i][:]...)
	}
	return rows
}

// Text is the matrix as plain text: comment lines saying what it is (the
// `#` lines that numpy.loadtxt, R's read.table and MATLAB's readmatrix
// skip or can be told to skip), then four rows of four numbers.
func (h Homogeneous) Text(what string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "# %s\n# %s\n", what, Convention)
	for _, row := range h {
		for j, v := range row {
			if j > 0 {
				b.WriteByte(' ')
			}
			b.WriteString(formatNumber(v))
		}
		b.WriteByte('\n')
	}
	return b.String()
}

// formatNumber writes v with 17 significant digits at most, enough to read
// back the same float64.
func formatNumber(v float64) string {
	if v == 0 {
		return "0"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}
