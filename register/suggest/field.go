package suggest

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"ferry/internal/parallel"
	"ferry/register"
	"ferry/transform"
)

// fieldMaxPairs bounds the cell–candidate covariances the error model's
// search holds: three axes of eight bytes each and the products behind
// them, about 200 MiB at this bound.
const fieldMaxPairs = 1 << 21

// suggestField is Suggest for a transform file that carries the error
// model (register.FieldGain): the candidates are ranked by the error
// variance they would remove from the cells under the fitted field, and the
// radii reported are those of the transform refitted with the chosen
// landmarks, as `ferry map` would give them.
func suggestField(f *register.Registration, g *register.FieldGain, cells []transform.Vec, n int, opt Options) (*Result, error) {
	dim := f.Transform.Dim()
	u := f.Uncertainty
	mapper, err := register.NewMapper(f)
	if err != nil {
		return nil, err
	}
	res := &Result{Dim: dim, Model: f.Transform.Kind(), Smoothing: f.Smoothing, NoiseFactor: u.NoiseFactor}
	if opt.Candidates != nil {
		if err := checkPoints("candidate location", opt.Candidates, dim); err != nil {
			return nil, err
		}
		res.Candidates = opt.Candidates
	} else {
		lo, hi := Bounds(dim, u.Source, cells)
		if res.Candidates, res.GridSpacing, err = Grid(dim, lo, hi, GridTarget); err != nil {
			return nil, err
		}
	}
	if len(res.Candidates) == 0 {
		return nil, errors.New("no candidate locations to choose from")
	}
	if len(res.Candidates) > fieldMaxPairs/minSearchCells {
		return nil, fmt.Errorf("%d candidate locations are too many to search (at most %d)", len(res.Candidates), fieldMaxPairs/minSearchCells)
	}
	search := searchSubset(len(cells), len(res.Candidates), fieldMaxPairs)
	res.SearchCells = len(search)
	sub := make([]transform.Vec, len(search))
	for k, i := range search {
		sub[k] = cells[i]
	}
	chosen, err := fieldGreedy(g, mapper, sub, res.Candidates, n, opt.CellSD, dim)
	if err != nil {
		return nil, err
	}

	// The radii reported, exactly, by refitting with the chosen ones.
	radii := make([]float64, len(cells))
	var zs []transform.Vec
	for k := 0; k <= len(chosen); k++ {
		m := mapper
		if k > 0 {
			zs = append(zs, res.Candidates[chosen[k-1]])
			if m, err = g.Refit(zs); err != nil {
				return nil, err
			}
		}
		for i, p := range m.MapAll(cells, opt.CellSD, false) {
			radii[i] = p.R95
		}
		sug, ok := res.step(k, chosen, radii)
		if !ok {
			continue
		}
		at := mapper.Map(sug.Source, nil)
		sug.Target, sug.Status, sug.TargetSD, sug.TargetR95 = at.Pos, string(at.Status), at.SD, at.R95
		res.Suggestions = append(res.Suggestions, sug)
	}
	res.CellR95After = radii
	return res, nil
}

// fieldGreedy chooses n candidates one by one, each the one that lowers
// the median r95 of the cells most once the variance it removes is taken
// off, conditioning on the ones chosen before (the sequential kriging
// update, kept as low-rank corrections U_l(x)·W_l(z)).
func fieldGreedy(g *register.FieldGain, mapper *register.Mapper, xs, zs []transform.Vec, n int, cellSD *transform.Vec, dim int) ([]int, error) {
	cross, err := g.Cross(xs, zs)
	if err != nil {
		return nil, err
	}
	vx, vz := g.Variances(xs), g.Variances(zs)
	noiseNew := g.NewNoise()
	// Each cell's own noise, as map adds it.
	own := make([]transform.Vec, len(xs))
	for i, x := range xs {
		if cellSD == nil {
			own[i] = g.CellNoise()
			continue
		}
		j := mapper.Jacobian(x)
		for k := range dim {
			for l := range dim {
				own[i][k] += j[k][l] * j[k][l] * cellSD[l] * cellSD[l]
			}
		}
	}
	Z := len(zs)
	var us, ws [][3][]float64 // corrections over cells and over candidates
	taken := make([]bool, Z)
	var chosen []int
	score := make([]float64, Z)
	for range n {
		parallel.Ranges(Z, 16, func(lo, hi int) {
			for j := lo; j < hi; j++ {
				if taken[j] {
					score[j] = math.Inf(1)
					continue
				}
				total := 0.0
				for i := range xs {
					for k := range dim {
						cij := cross[k][i*Z+j]
						for l := range us {
							cij -= us[l][k][i] * ws[l][k][j]
						}
						v := vx[i][k]
						if d := vz[j][k] + noiseNew[k]; d > 0 {
							v -= cij * cij / d
						}
						total += math.Max(v, 0)
					}
				}
				score[j] = total / float64(len(xs))
			}
		})
		best, err := refineByRefit(g, xs, zs, score, taken, chosen, cellSD)
		if err != nil {
			return nil, err
		}
		if best < 0 {
			break
		}
		taken[best] = true
		chosen = append(chosen, best)
		// The corrections of the new landmark at every cell and candidate.
		col, err := g.Cross(zs, zs[best:best+1])
		if err != nil {
			return nil, err
		}
		var uNew, wNew [3][]float64
		for k := range dim {
			d := vz[best][k] + noiseNew[k]
			if !(d > 0) {
				uNew[k], wNew[k] = make([]float64, len(xs)), make([]float64, Z)
				continue
			}
			sd := math.Sqrt(d)
			uNew[k] = make([]float64, len(xs))
			for i := range xs {
				c := cross[k][i*Z+best]
				for l := range us {
					c -= us[l][k][i] * ws[l][k][best]
				}
				uNew[k][i] = c / sd
			}
			wNew[k] = make([]float64, Z)
			for j := range zs {
				c := col[k][j]
				for l := range ws {
					c -= ws[l][k][j] * ws[l][k][best]
				}
				wNew[k][j] = c / sd
			}
		}
		for k := range dim {
			for i := range xs {
				vx[i][k] = math.Max(vx[i][k]-uNew[k][i]*uNew[k][i], 0)
			}
			for j := range zs {
				vz[j][k] = math.Max(vz[j][k]-wNew[k][j]*wNew[k][j], 0)
			}
		}
		us, ws = append(us, uNew), append(ws, wNew)
	}
	return chosen, nil
}

// fieldRefitTop is how many of the best-ranked candidates are tried by
// refitting before one is chosen.
const fieldRefitTop = 16

// refineByRefit takes the fieldRefitTop candidates the kriging update ranks
// best and chooses the one whose refitted transform gives the cells the
// lowest median r95 as map computes it: the update is the best linear
// correction under the field, which the refitted spline need not achieve,
// and a landmark that the spline would use badly is passed over. It returns
// −1 when no candidate is left or none of them lowers the median.
func refineByRefit(g *register.FieldGain, xs, zs []transform.Vec, score []float64, taken []bool, chosen []int, cellSD *transform.Vec) (int, error) {
	var order []int
	for j := range zs {
		if !taken[j] {
			order = append(order, j)
		}
	}
	if len(order) == 0 {
		return -1, nil
	}
	sort.SliceStable(order, func(a, b int) bool { return score[order[a]] < score[order[b]] })
	order = order[:min(len(order), fieldRefitTop)]
	base := make([]transform.Vec, 0, len(chosen)+1)
	for _, j := range chosen {
		base = append(base, zs[j])
	}
	// The mean variance and the median r95 now: a candidate that would not
	// lower the one without raising the other is not suggested, and the
	// search stops short.
	now, err := g.Refit(base)
	if err != nil {
		return -1, err
	}
	ps := now.MapAll(xs, cellSD, false)
	bestMean, nowMedian := meanVariance(ps), medianR95(ps)
	best := -1
	for _, j := range order {
		m, err := g.Refit(append(base, zs[j]))
		if err != nil {
			return -1, err
		}
		// The mean squared error decides among the candidates that do not
		// raise the median r95, the figure suggest reports for each row.
		ps := m.MapAll(xs, cellSD, false)
		if v := meanVariance(ps); v < bestMean && medianR95(ps) <= nowMedian {
			best, bestMean = j, v
		}
	}
	return best, nil
}

// meanVariance is the cells' mean squared error as map predicts it, the
// trace of each cell's covariance averaged over the cells: the integrated
// mean squared error of the design literature (Sacks, Welch, Mitchell &
// Wynn 1989, Statistical Science 4:409–435), which weighs most the cells
// the map knows worst, the ones that make its high percentiles.
func meanVariance(ps []register.Mapped) float64 {
	sum := 0.0
	for _, p := range ps {
		for k := range p.Cov {
			sum += p.Cov[k][k]
		}
	}
	return sum / float64(max(len(ps), 1))
}

// medianR95 is the cells' median r95.
func medianR95(ps []register.Mapped) float64 {
	r := make([]float64, len(ps))
	for i, p := range ps {
		r[i] = p.R95
	}
	return medianOf(r)
}
