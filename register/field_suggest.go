package register

import (
	"errors"
	"fmt"

	"gonum.org/v1/gonum/mat"

	"ferry/landmarks"
	"ferry/transform"
)

// FieldGain is the error model of a transform file seen from suggest: the
// covariance, under the fitted field, between the map's errors at cells and
// at candidate locations of a new landmark. Under the model the best linear
// correction of the map after one more landmark at z, whose pick has noise
// n_k, lowers the error variance at x on axis k by C_k(x, z)²/(v_k(z) + n_k)
// whatever its target turns out to be (the kriging update; Cressie 1993,
// §3.2), which ranks the candidates; the radii after the chosen landmarks
// are then computed exactly, by refitting (Refit).
type FieldGain struct {
	f *fieldMapper
	u *UncertaintyModel
	t transform.Transform
}

// NewFieldGain prepares the covariances of the registration's error
// model; it fails when it has none.
func NewFieldGain(file *Registration) (*FieldGain, error) {
	if err := file.checkUncertainty(); err != nil {
		return nil, err
	}
	u := file.Uncertainty
	if u.Field == nil {
		return nil, errors.New("the transform file has no error model")
	}
	fm, err := newFieldMapper(file.Transform, u)
	if err != nil {
		return nil, err
	}
	return &FieldGain{f: fm, u: u, t: file.Transform}, nil
}

// Variances are the error variances per axis (µm²) at xs, the points' own
// noise not included.
func (g *FieldGain) Variances(xs []transform.Vec) []transform.Vec { return g.f.exactVariances(xs) }

// CellNoise is a mapped cell's own picking noise per axis (µm²).
func (g *FieldGain) CellNoise() transform.Vec { return g.f.noise() }

// newKind is the kind a suggested landmark is taken to be: a vessel branch
// point, the landmark suggest looks for in vivo, when the set has them.
func (g *FieldGain) newKind() landmarks.Kind {
	if _, ok := g.f.params.Kinds[landmarks.KindVessel]; ok || len(g.u.Kinds) == 0 {
		return landmarks.KindVessel
	}
	return g.u.Kinds[0]
}

// NewNoise is the picking noise per axis (µm²) of a new landmark.
func (g *FieldGain) NewNoise() transform.Vec {
	d := g.f.params.kindNoise(g.newKind())
	var v transform.Vec
	for k := range g.f.dim {
		v[k] = g.f.params.Amplitude[k] * g.f.params.Noise[k] * d
	}
	return v
}

// Cross returns, per axis, the covariance (µm²) between the map's errors at
// xs[i] and zs[j] at index i·len(zs)+j:
//
//	C_k = s_k·(ρ(x, z) − a_xᵀρ_z − a_zᵀρ_x + a_xᵀ(R + λ_k·D)a_z).
func (g *FieldGain) Cross(xs, zs []transform.Vec) ([3][]float64, error) {
	var out [3][]float64
	f := g.f
	n := len(f.src)
	ax, err := f.weigh(xs)
	if err != nil {
		return out, err
	}
	az, err := f.weigh(zs)
	if err != nil {
		return out, err
	}
	corrTo := func(ps []transform.Vec) *mat.Dense {
		c := mat.NewDense(n, len(ps), nil)
		for j, s := range f.src {
			for i, p := range ps {
				c.Set(j, i, f.params.corr(p.Sub(s).Norm()))
			}
		}
		return c
	}
	px, pz := corrTo(xs), corrTo(zs)
	var raz, daz, field, noise, t1, t2 mat.Dense
	raz.Mul(f.corr, az)
	daz.CloneFrom(az)
	for j := range n {
		row := daz.RawRowView(j)
		for i := range row {
			row[i] *= f.d[j]
		}
	}
	field.Mul(ax.T(), &raz)
	noise.Mul(ax.T(), &daz)
	t1.Mul(ax.T(), pz)
	t2.Mul(px.T(), az)
	for k := range f.dim {
		out[k] = make([]float64, len(xs)*len(zs))
	}
	for i, x := range xs {
		for j, z := range zs {
			base := f.params.corr(x.Sub(z).Norm()) - t1.At(i, j) - t2.At(i, j) + field.At(i, j)
			for k := range f.dim {
				out[k][i*len(zs)+j] = f.params.Amplitude[k] * (base + f.params.Noise[k]*noise.At(i, j))
			}
		}
	}
	return out, nil
}

// Refit returns the mapper of the transform refitted with new landmarks at
// the source positions zs added, of the kind newKind: their
// targets are taken where the map puts them, which changes the map there
// but not its error variances, which do not depend on the targets. Only a
// spline or an affine map is refitted.
func (g *FieldGain) Refit(zs []transform.Vec) (*Mapper, error) {
	u := *g.u
	src := append(append([]transform.Vec(nil), u.Source...), zs...)
	dst := make([]transform.Vec, len(src))
	for i, x := range src {
		dst[i] = g.t.Apply(x)
	}
	w := append([]float64(nil), u.Weights...)
	// The weight of the new kind: that of a landmark of the kind in the
	// set, else the mean.
	wNew, found := 0.0, false
	for i, k := range u.Kinds {
		if k == g.newKind() {
			wNew, found = u.Weights[i], true
			break
		}
	}
	if !found {
		for _, x := range u.Weights {
			wNew += x / float64(len(u.Weights))
		}
	}
	for range zs {
		w = append(w, wNew)
	}
	var opt transform.Options
	switch t := g.t.(type) {
	case *transform.Spline:
		opt = transform.Options{Smoothing: t.Smoothing, Weights: w}
	case *transform.Linear:
		opt = transform.Options{Weights: w, NoMirror: !t.Mirrored}
	default:
		return nil, fmt.Errorf("cannot refit a %s transform", g.t.Kind())
	}
	res, err := transform.Fit(g.t.Kind(), g.t.Dim(), src, dst, opt)
	if err != nil {
		return nil, err
	}
	u.Source, u.Weights = src, w
	u.Kinds = append([]landmarks.Kind(nil), g.u.Kinds...)
	for range zs {
		u.Kinds = append(u.Kinds, g.newKind())
	}
	return NewMapper(&Registration{Transform: res.Transform, Uncertainty: &u})
}

// Jacobian is the transform's Jacobian at x.
func (m *Mapper) Jacobian(x transform.Vec) transform.Mat { return m.t.Jacobian(x) }
