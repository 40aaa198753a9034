package review

import (
	"bytes"
	"fmt"
	"image"
	"image/png"
	"math"
	"slices"

	"ferry/imaging"
	"ferry/transform"
)

// Panels are the image panels of a cell: each modality in the plane
// through the cell (xy) and in the orthogonal slice (xz), all in the EM
// frame.
var panelNames = []string{"em-xy", "em-xz", "vivo-xy", "vivo-xz"}

// inverseStep is the spacing, in pixels, of the lattice on which the in
// vivo panels' source positions are computed exactly through the inverse
// transform; between its nodes they are interpolated bilinearly, which a
// smooth transform allows over a few micrometres.
const inverseStep = 8

// Panel renders panel name of the cell at place k as an 8-bit grey PNG,
// contrast-stretched between the 1st and 99.5th percentiles of the pixels
// that fall inside the stack; pixels outside it are black.
func (s *Session) Panel(k int, name string) ([]byte, error) {
	if !slices.Contains(panelNames, name) {
		return nil, fmt.Errorf("no panel %q", name)
	}
	centre, half, err := s.centre(k)
	if err != nil {
		return nil, err
	}
	n := panelPixels
	px := 2 * half / float64(n)
	// pos(u, v) is the EM-frame position of pixel (u, v).
	pos := func(u, v float64) transform.Vec {
		x := centre[0] - half + (u+0.5)*px
		if name[len(name)-2:] == "xy" {
			return transform.Vec{x, centre[1] - half + (v+0.5)*px, centre[2]}
		}
		return transform.Vec{x, centre[1], centre[2] - half + (v+0.5)*px}
	}
	vox := make([]transform.Vec, n*n)
	ok := make([]bool, n*n)
	var vol *imaging.Volume
	if name[:2] == "em" {
		vol = s.in.Target
		for v := range n {
			for u := range n {
				p := pos(float64(u), float64(v)).Sub(s.in.TargetOffset)
				vox[v*n+u] = transform.Vec{p[0] / s.in.TargetVoxel[0], p[1] / s.in.TargetVoxel[1], p[2] / s.in.TargetVoxel[2]}
				ok[v*n+u] = true
			}
		}
	} else {
		vol = s.in.Source
		s.inverseLattice(pos, n, vox, ok)
	}
	s.imageMu.Lock()
	values, inside, err := sampleRows(vol, vox, ok, n)
	s.imageMu.Unlock()
	if err != nil {
		return nil, err
	}
	img := image.NewGray(image.Rect(0, 0, n, n))
	var in []float64
	for i, x := range values {
		if inside[i] {
			in = append(in, x)
		}
	}
	if len(in) > 0 {
		slices.Sort(in)
		lo := in[int(0.01*float64(len(in)-1))]
		hi := in[int(0.995*float64(len(in)-1))]
		if hi <= lo {
			hi = lo + 1
		}
		for i, x := range values {
			if inside[i] {
				img.Pix[i] = uint8(math.Round(255 * math.Min(1, math.Max(0, (x-lo)/(hi-lo)))))
			}
		}
	}
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// inverseLattice fills vox with the source voxel positions of the n × n
// pixels through the inverse transform: exact on every inverseStep-th pixel
// and the last, bilinear between; ok is false where the inverse failed.
func (s *Session) inverseLattice(pos func(u, v float64) transform.Vec, n int, vox []transform.Vec, ok []bool) {
	var nodes []int
	for u := 0; u < n-1; u += inverseStep {
		nodes = append(nodes, u)
	}
	nodes = append(nodes, n-1)
	m := len(nodes)
	src := make([]transform.Vec, m*m)
	good := make([]bool, m*m)
	t := s.in.Transform.Transform
	for b, v := range nodes {
		for a, u := range nodes {
			q, err := t.Invert(pos(float64(u), float64(v)))
			if err == nil && q.IsFinite() {
				src[b*m+a], good[b*m+a] = q, true
			}
		}
	}
	sv := s.in.SourceVoxel
	for b := range m - 1 {
		for a := range m - 1 {
			u0, u1, v0, v1 := nodes[a], nodes[a+1], nodes[b], nodes[b+1]
			all := good[b*m+a] && good[b*m+a+1] && good[(b+1)*m+a] && good[(b+1)*m+a+1]
			for v := v0; v <= v1; v++ {
				for u := u0; u <= u1; u++ {
					if !all {
						continue
					}
					fu, fv := float64(u-u0)/float64(u1-u0), float64(v-v0)/float64(v1-v0)
					var p transform.Vec
					for k := range 3 {
						top := src[b*m+a][k]*(1-fu) + src[b*m+a+1][k]*fu
						bot := src[(b+1)*m+a][k]*(1-fu) + src[(b+1)*m+a+1][k]*fu
						p[k] = (top*(1-fv) + bot*fv) / sv[k]
					}
					vox[v*n+u], ok[v*n+u] = p, true
				}
			}
		}
	}
}

// maxCropVoxels bounds the crop read at once (32 MB of 16-bit samples).
// A panel of a stack much finer than the panel's pixels, such as an EM
// export at a few nanometres, needs more: it is then read a panel row at a
// time.
const maxCropVoxels = 1 << 24

// sampleRows is sample over the n × n positions of a panel, in one crop or,
// when that would exceed maxCropVoxels, one panel row at a time.
func sampleRows(vol *imaging.Volume, vox []transform.Vec, ok []bool, n int) ([]float64, []bool, error) {
	if cropVoxels(vol, vox, ok) <= maxCropVoxels {
		return sample(vol, vox, ok)
	}
	values := make([]float64, len(vox))
	inside := make([]bool, len(vox))
	for v := range n {
		row := v * n
		vals, in, err := sample(vol, vox[row:row+n], ok[row:row+n])
		if err != nil {
			return nil, nil, err
		}
		copy(values[row:], vals)
		copy(inside[row:], in)
	}
	return values, inside, nil
}

// bounds is the box of voxels, clipped to the volume, that trilinear
// interpolation at the positions needs; empty when lo exceeds hi.
func bounds(vol *imaging.Volume, vox []transform.Vec, ok []bool) (lo, hi [3]int) {
	lo = [3]int{math.MaxInt, math.MaxInt, math.MaxInt}
	hi = [3]int{math.MinInt, math.MinInt, math.MinInt}
	dims := [3]int{vol.Width, vol.Height, vol.Depth}
	for i, p := range vox {
		if !ok[i] || !p.IsFinite() {
			continue
		}
		for k := range 3 {
			if dims[k] == 1 {
				// A plane: its one page, whatever the depth asked.
				lo[k], hi[k] = 0, 0
				continue
			}
			f := int(math.Max(math.Min(math.Floor(p[k]), 1<<40), -1<<40))
			lo[k] = max(min(lo[k], f), 0)
			hi[k] = min(max(hi[k], f+1), dims[k]-1)
		}
	}
	return lo, hi
}

func cropVoxels(vol *imaging.Volume, vox []transform.Vec, ok []bool) int {
	lo, hi := bounds(vol, vox, ok)
	n := 1
	for k := range 3 {
		if lo[k] > hi[k] {
			return 0
		}
		n *= hi[k] - lo[k] + 1
	}
	return n
}

// sample reads the crop of vol that the voxel positions need and
// interpolates it trilinearly at each; inside reports the positions whose
// eight neighbours all lie in the volume.
func sample(vol *imaging.Volume, vox []transform.Vec, ok []bool) ([]float64, []bool, error) {
	dims := [3]int{vol.Width, vol.Height, vol.Depth}
	lo, hi := bounds(vol, vox, ok)
	values := make([]float64, len(vox))
	inside := make([]bool, len(vox))
	if lo[0] > hi[0] || lo[1] > hi[1] || lo[2] > hi[2] {
		return values, inside, nil
	}
	crop, err := vol.Crop(lo[0], lo[1], lo[2], hi[0]-lo[0]+1, hi[1]-lo[1]+1, hi[2]-lo[2]+1)
	if err != nil {
		return nil, nil, err
	}
	for i, p := range vox {
		if !ok[i] || !p.IsFinite() {
			continue
		}
		var base [3]int
		var frac [3]float64
		in := true
		for k := range 3 {
			// A stack one page deep is a plane: its z is taken as is.
			if dims[k] == 1 {
				base[k], frac[k] = 0, 0
				continue
			}
			f := math.Floor(p[k])
			if f < 0 || f+1 > float64(dims[k]-1) {
				in = false
				break
			}
			base[k], frac[k] = int(f)-lo[k], p[k]-f
		}
		if !in {
			continue
		}
		at := func(di, dj, dk int) float64 {
			return float64(crop.At(base[0]+di, base[1]+dj, base[2]+dk))
		}
		x := 0.0
		for dk := range 2 {
			for dj := range 2 {
				for di := range 2 {
					w := pick(frac[0], di) * pick(frac[1], dj) * pick(frac[2], dk)
					if w != 0 {
						x += w * at(di, dj, dk)
					}
				}
			}
		}
		values[i], inside[i] = x, true
	}
	return values, inside, nil
}

func pick(f float64, d int) float64 {
	if d == 0 {
		return 1 - f
	}
	return f
}
