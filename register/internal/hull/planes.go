package hull

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"ferry/internal/parallel"
	"ferry/transform"
)

// Planes is a cloud's hull, grown outward by a margin, as the support planes
// of the cloud in a fixed set of directions: plane k is the set of x with
// Dirs[k]·x = Reach[k], and the hull is the side where Dirs[k]·x ≤ Reach[k]
// for every k.
type Planes struct {
	Dim   int
	Dirs  []transform.Vec
	Reach []float64
	// Extent is the cloud's largest width over the directions (µm), the
	// scale against which rounding tolerances are set.
	Extent float64
}

// NewPlanes is the support-plane hull of points in dim (2 or 3) dimensions,
// each plane pushed margin (µm) outward. Points must not be empty.
func NewPlanes(points []transform.Vec, dim int, margin float64) Planes {
	p := Planes{Dim: dim, Dirs: Directions(points, dim)}
	p.Reach = make([]float64, len(p.Dirs))
	width := make([]float64, len(p.Dirs))
	xs := make([]float64, len(points))
	ys := make([]float64, len(points))
	zs := make([]float64, len(points))
	for i, q := range points {
		xs[i], ys[i], zs[i] = q[0], q[1], q[2]
	}
	// 642 directions × 200 000 points is 10⁸ dot products: blocks of
	// directions are shared among the cores, each block one pass over the
	// coordinates. A maximum does not depend on the order it is taken in,
	// so neither does the result.
	const block = 8
	nBlocks := (len(p.Dirs) + block - 1) / block
	parallel.Ranges(nBlocks, 1, func(b0, b1 int) {
		for blk := b0; blk < b1; blk++ {
			lo, hi := blk*block, min((blk+1)*block, len(p.Dirs))
			var far, near [block]float64
			for k := range far {
				far[k], near[k] = math.Inf(-1), math.Inf(1)
			}
			dirs := p.Dirs[lo:hi]
			for i := range xs {
				x, y, z := xs[i], ys[i], zs[i]
				for k, d := range dirs {
					t := d[0]*x + d[1]*y + d[2]*z
					far[k] = max(far[k], t)
					near[k] = min(near[k], t)
				}
			}
			for k := range dirs {
				p.Reach[lo+k] = far[k] + margin
				width[lo+k] = far[k] - near[k]
			}
		}
	})
	for _, w := range width {
		p.Extent = max(p.Extent, w)
	}
	return p
}

// Tolerance (µm) is the rounding margin by which a point may lie beyond a
// plane and still count as on it: 10⁻⁹ of the cloud's extent.
func (p Planes) Tolerance() float64 { return 1e-9 * p.Extent }

// Depth is the signed distance (µm) from x to the edge of the hull, positive
// inside, and the outward normal of the face that sets it. Inside, it is the
// distance to the nearest support plane, which is the distance to the
// polytope's boundary; outside, it is minus the largest overshoot of a
// plane, which is at most the true distance.
func (p Planes) Depth(x transform.Vec) (float64, transform.Vec) {
	best := math.Inf(1)
	var normal transform.Vec
	for k, d := range p.Dirs {
		if s := p.Reach[k] - d.Dot(x); s < best {
			best, normal = s, d
		}
	}
	return best, normal
}

// Directions are the planes' outward normals for points in dim dimensions:
// evenly spread unit vectors (on the circle in 2-D, on the sphere by a
// Fibonacci lattice in 3-D), then the coordinate axes and the points'
// principal axes, each both ways.
//
// Evenly spread directions leave the planes of a box's faces a few degrees
// off, which puts the middle of a 500 µm face some 20 µm too far out; the
// coordinate axes and the principal axes catch the faces of a block cut
// square to either. The coordinate axes also keep the polytope inside the
// points' bounding box.
func Directions(points []transform.Vec, dim int) []transform.Vec {
	dirs := spread(dim)
	for _, axis := range append(coordinateAxes(dim), principalAxes(points, dim)...) {
		dirs = append(dirs, axis, axis.Scale(-1))
	}
	return dirs
}

// spread is n evenly spread unit vectors: 160 on the circle in 2-D, 642 on
// the sphere by a Fibonacci lattice in 3-D.
func spread(dim int) []transform.Vec {
	var dirs []transform.Vec
	if dim == 2 {
		const n = 160
		for k := range n {
			a := 2 * math.Pi * float64(k) / n
			dirs = append(dirs, transform.Vec{math.Cos(a), math.Sin(a), 0})
		}
		return dirs
	}
	const n = 642
	golden := math.Pi * (3 - math.Sqrt(5))
	for k := range n {
		z := 1 - (2*float64(k)+1)/n
		r := math.Sqrt(1 - z*z)
		a := golden * float64(k)
		dirs = append(dirs, transform.Vec{r * math.Cos(a), r * math.Sin(a), z})
	}
	return dirs
}

func coordinateAxes(dim int) []transform.Vec {
	axes := make([]transform.Vec, dim)
	for k := range dim {
		axes[k][k] = 1
	}
	return axes
}

// principalAxes are the unit eigenvectors of the covariance of points, none
// when there are fewer than two or it cannot be factorised.
func principalAxes(points []transform.Vec, dim int) []transform.Vec {
	if len(points) < 2 {
		return nil
	}
	var mean transform.Vec
	for _, p := range points {
		mean = mean.Add(p)
	}
	mean = mean.Scale(1 / float64(len(points)))
	cov := mat.NewSymDense(dim, nil)
	for _, p := range points {
		d := p.Sub(mean)
		for i := range dim {
			for j := i; j < dim; j++ {
				cov.SetSym(i, j, cov.At(i, j)+d[i]*d[j])
			}
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(cov, true) {
		return nil
	}
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	axes := make([]transform.Vec, dim)
	for k := range dim {
		for i := range dim {
			axes[k][i] = vecs.At(i, k)
		}
	}
	return axes
}
