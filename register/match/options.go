package match

import (
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/mat"

	"ferry/register"
	"ferry/status"
	"ferry/transform"
)

// space is what every cell's options are computed against: the candidates
// (by rank), their tree and their volume.
type space struct {
	opt     Options
	dim     int
	cands   []transform.Vec
	tree    *candidateTree
	vol     volume
	reachK2 float64 // χ²_d quantile of reachP
}

func newSpace(ranked []transform.Vec, opt Options) *space {
	sp := &space{opt: opt, dim: opt.Dim, cands: ranked, reachK2: chiSquareQuantile(opt.Dim, reachP)}
	sp.tree = newCandidateTree(ranked, opt.Dim)
	if len(ranked) > 0 {
		sp.vol = newVolume(ranked, opt.Dim, typicalSpacing(sp.tree, ranked)/2)
	}
	return sp
}

// typicalSpacing is the median distance (µm) from a candidate to its nearest
// neighbour, over an evenly strided sample of at most spacingSample of them.
func typicalSpacing(t *candidateTree, pos []transform.Vec) float64 {
	if len(pos) < 2 {
		return 0
	}
	step := max(1, len(pos)/spacingSample)
	var d []float64
	for j := 0; j < len(pos); j += step {
		d = append(d, t.kthDistance(pos[j], 2))
	}
	slices.Sort(d)
	return d[len(d)/2]
}

// cellOptions are one cell's candidates in reach, kept to the likeliest
// maxOptions, with their likelihood ratios: the density of the offset from
// the cell over the density of candidates that are not its counterpart.
// inside is the chance that its counterpart lies inside the candidates'
// volume; rest sums the ratios of candidates in reach beyond the likeliest.
type cellOptions struct {
	ranks   []int
	ratios  []float64
	rest    float64
	inside  float64
	outside bool
	inReach int
}

// options weighs the candidates near one mapped cell.
func (sp *space) options(mp register.Mapped) cellOptions {
	var o cellOptions
	if sp.tree.n == 0 || mp.Status == status.NoInverse {
		return o
	}
	dim := sp.dim
	mu := flatten(mp.Pos, dim)
	// The offset of the counterpart from the mapped cell: the mapping's
	// covariance plus the candidate's own spread.
	s := mp.Cov
	for k := range dim {
		s[k][k] += sp.opt.CandidateSD * sp.opt.CandidateSD
	}
	g, ok := newGaussian(s, dim)
	if !ok {
		return o
	}

	// The chance that the counterpart lies inside the candidates' volume,
	// from the cell's signed depth and the spread of the offset across the
	// nearest face; none at all outside by more than the cell's 95 %
	// radius.
	depth, normal := sp.vol.depth(mu)
	if depth < -mp.R95 {
		o.outside = true
		return o
	}
	if sn := sqrt(quadratic(s, normal, dim)); sn > 0 {
		o.inside = 0.5 * math.Erfc(-depth/(sn*math.Sqrt2))
	} else if depth >= 0 {
		o.inside = 1
	}
	if o.inside == 0 {
		return o
	}

	// The density of candidates that are not this cell's counterpart:
	// k − 1 of the k nearest (the counterpart is likely one of them) over
	// the part of their ball inside the volume.
	k := min(densityNeighbours, sp.tree.n)
	rk := math.Max(sp.tree.kthDistance(mu, k), 1e-6)
	share := math.Max(ballShare(dim, rk, depth), minBallShare)
	density := float64(max(k-1, 1)) / (share * ballVolume(dim, rk))

	reach := math.Sqrt(g.maxEigen * sp.reachK2)
	near := sp.tree.within(mu, reach)
	o.inReach = len(near)
	type scored struct {
		rank  int
		ratio float64
	}
	all := make([]scored, 0, len(near))
	for _, nb := range near {
		d := sp.cands[nb.rank].Sub(mu)
		if r := math.Exp(g.logDensity(d)) / density; r > 0 {
			all = append(all, scored{nb.rank, r})
		}
	}
	if len(all) > maxOptions {
		sort.SliceStable(all, func(a, b int) bool { return all[a].ratio > all[b].ratio })
		for _, c := range all[maxOptions:] {
			o.rest += c.ratio
		}
		all = all[:maxOptions]
		sort.Slice(all, func(a, b int) bool { return all[a].rank < all[b].rank })
	}
	for _, c := range all {
		o.ranks = append(o.ranks, c.rank)
		o.ratios = append(o.ratios, c.ratio)
	}
	return o
}

// gaussian is a zero-mean normal density of covariance S in dim dimensions.
type gaussian struct {
	dim      int
	inv      transform.Mat
	logNorm  float64
	maxEigen float64
}

func newGaussian(s transform.Mat, dim int) (gaussian, bool) {
	g := gaussian{dim: dim}
	sym := mat.NewSymDense(dim, nil)
	for i := range dim {
		for j := range dim {
			sym.SetSym(i, j, 0.5*(s[i][j]+s[j][i]))
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(sym, true) {
		return g, false
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	logDet := 0.0
	for _, l := range vals {
		if !(l > 0) || math.IsInf(l, 0) {
			return g, false
		}
		logDet += math.Log(l)
		g.maxEigen = math.Max(g.maxEigen, l)
	}
	// S⁻¹ = V Λ⁻¹ Vᵀ.
	for i := range dim {
		for j := range dim {
			var x float64
			for k, l := range vals {
				x += vecs.At(i, k) * vecs.At(j, k) / l
			}
			g.inv[i][j] = x
		}
	}
	g.logNorm = -0.5 * (float64(dim)*math.Log(2*math.Pi) + logDet)
	return g, true
}

func (g gaussian) logDensity(d transform.Vec) float64 {
	return g.logNorm - 0.5*quadratic(g.inv, d, g.dim)
}

// quadratic is dᵀ A d over the first dim axes.
func quadratic(a transform.Mat, d transform.Vec, dim int) float64 {
	var q float64
	for i := range dim {
		for j := range dim {
			q += d[i] * a[i][j] * d[j]
		}
	}
	return q
}
