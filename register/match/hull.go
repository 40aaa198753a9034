package match

import (
	"math"
	"runtime"
	"sync"

	"gonum.org/v1/gonum/mat"

	"ferry/transform"
)

// volume is the candidates' convex hull, grown outward by a margin,
// approximated from outside by its support planes in a fixed set of
// directions, as the landmarks' hull of package register is, with the
// coordinate and principal axes added. It stands for the volume in which candidates were looked for.
//
// The margin is half the candidates' typical nearest-neighbour spacing: the
// outermost candidates lie, on average, that far inside the edge of the
// volume that was searched.
type volume struct {
	dim   int
	dirs  []transform.Vec
	reach []float64
}

func newVolume(pos []transform.Vec, dim int, margin float64) volume {
	// Evenly spread directions leave the planes of a box's faces a few
	// degrees off, which puts the middle of a 500 µm face some 20 µm too
	// far out; the coordinate axes and the principal axes of the candidates
	// catch the faces of a block cut square to either.
	dirs := directions(dim)
	for _, axis := range append(coordinateAxes(dim), principalAxes(pos, dim)...) {
		dirs = append(dirs, axis, axis.Scale(-1))
	}
	v := volume{dim: dim, dirs: dirs}
	v.reach = make([]float64, len(v.dirs))
	xs := make([]float64, len(pos))
	ys := make([]float64, len(pos))
	zs := make([]float64, len(pos))
	for i, p := range pos {
		xs[i], ys[i], zs[i] = p[0], p[1], p[2]
	}
	// 642 directions × 200 000 candidates is 10⁸ dot products: the
	// directions are shared among the cores, a block of them per pass over
	// the coordinates.
	const block = 8
	nBlocks := (len(v.dirs) + block - 1) / block
	workers := max(1, min(runtime.GOMAXPROCS(0), nBlocks))
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for blk := w; blk < nBlocks; blk += workers {
				lo, hi := blk*block, min((blk+1)*block, len(v.dirs))
				var far [block]float64
				for k := range far {
					far[k] = math.Inf(-1)
				}
				dirs := v.dirs[lo:hi]
				for i := range xs {
					x, y, z := xs[i], ys[i], zs[i]
					for k, d := range dirs {
						if t := d[0]*x + d[1]*y + d[2]*z; t > far[k] {
							far[k] = t
						}
					}
				}
				for k := range dirs {
					v.reach[lo+k] = far[k] + margin
				}
			}
		}()
	}
	wg.Wait()
	return v
}

func coordinateAxes(dim int) []transform.Vec {
	axes := make([]transform.Vec, dim)
	for k := range dim {
		axes[k][k] = 1
	}
	return axes
}

// principalAxes are the eigenvectors of the covariance of pos, none when it
// cannot be factorised.
func principalAxes(pos []transform.Vec, dim int) []transform.Vec {
	if len(pos) < 2 {
		return nil
	}
	var mean transform.Vec
	for _, p := range pos {
		mean = mean.Add(p)
	}
	mean = mean.Scale(1 / float64(len(pos)))
	cov := mat.NewSymDense(dim, nil)
	for _, p := range pos {
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
		if n := axes[k].Norm(); n > 0 {
			axes[k] = axes[k].Scale(1 / n)
		}
	}
	return axes
}

// directions spreads unit vectors evenly: on the circle in 2-D, on the
// sphere by a Fibonacci lattice in 3-D.
func directions(dim int) []transform.Vec {
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

// depth is the signed distance (µm) from x to the edge of the volume,
// positive inside, and the outward normal of the face that sets it. Inside,
// it is the distance to the nearest support plane, which is the distance to
// the polytope's boundary; outside, it is minus the largest overshoot of a
// plane, which is at most the true distance.
func (v volume) depth(x transform.Vec) (float64, transform.Vec) {
	best := math.Inf(1)
	var normal transform.Vec
	for k, d := range v.dirs {
		if s := v.reach[k] - d.Dot(x); s < best {
			best, normal = s, d
		}
	}
	return best, normal
}

// ballShare is the share of a ball (disc in 2-D) of radius r whose centre
// lies at signed depth h inside a half-space: the edge correction of a
// density counted in that ball.
func ballShare(dim int, r, h float64) float64 {
	switch {
	case r <= 0 || h >= r:
		return 1
	case h <= -r:
		return 0
	}
	if dim == 2 {
		// The circular segment beyond the edge.
		seg := r*r*math.Acos(h/r) - h*math.Sqrt(r*r-h*h)
		return 1 - seg/(math.Pi*r*r)
	}
	// The spherical cap of height a beyond the edge, π a² (3r − a)/3.
	a := r - h
	return 1 - (a*a*(3*r-a)/4)/(r*r*r)
}

// ballVolume is the volume (µm³) of a ball of radius r, or the area (µm²) of
// a disc in 2-D.
func ballVolume(dim int, r float64) float64 {
	if dim == 2 {
		return math.Pi * r * r
	}
	return 4 * math.Pi * r * r * r / 3
}

func sqrt(x float64) float64 { return math.Sqrt(math.Max(x, 0)) }
