package register

import (
	"encoding/binary"
	"hash/fnv"
	"math"
	"sync"

	"ferry/transform"
)

// fitCache remembers the fits of one check, and of the second check fit
// runs without the flagged landmarks, by everything a fit depends on: the
// model, the pairs, their weights and the smoothing asked for. The
// sequential deletion's last fit is the clean set's, which the model
// comparison and the clean fit then ask for again, and the second check
// starts from that same set; each of those is a smoothing search of
// seventeen fits. A fit found here is the very result computed before, so
// nothing changes but the time.
type fitCache struct {
	mu   sync.Mutex
	fits map[fitKey][]fitEntry
	// off makes a cache that never answers, for the tests that compare.
	off bool
	// hint is the grid index of the last smoothing search's best
	// (chooseSmoothing), where the next search of the check starts; hasHint
	// is false before the first search and after one that chose S = 0.
	hint    int
	hasHint bool
}

// smoothingHint returns where the check's next smoothing search starts.
// A cache that is off never hints: every search then covers the whole
// grid, which the tests compare against.
func (c *fitCache) smoothingHint() (int, bool) {
	if c == nil || c.off {
		return 0, false
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	return c.hint, c.hasHint
}

// searchWhole says whether every smoothing search covers the whole grid:
// for a cache that is off, the reference the tests compare against.
func (c *fitCache) searchWhole() bool { return c != nil && c.off }

// setSmoothingHint remembers the grid index of a search's best, −1 for
// S = 0.
func (c *fitCache) setSmoothingHint(k int) {
	if c == nil || c.off {
		return
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	c.hint, c.hasHint = k, k >= 0
}

// fitKey is a hash of a fit's inputs; fitEntry keeps the inputs in full so
// that a collision can never return another set's fit.
type fitKey uint64

type fitEntry struct {
	kind      transform.Kind
	dim       int
	src, dst  []transform.Vec
	weights   []float64
	smoothing Smoothing
	noMirror  bool
	fit       *fitted
}

func newFitCache() *fitCache { return &fitCache{fits: map[fitKey][]fitEntry{}} }

func hashFit(kind transform.Kind, p *Problem, weights []float64, s Settings) fitKey {
	h := fnv.New64a()
	var b [8]byte
	put := func(x float64) {
		binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
		h.Write(b[:])
	}
	h.Write([]byte(kind))
	put(float64(p.Dim))
	for i := range p.Source {
		for k := range 3 {
			put(p.Source[i][k])
			put(p.Target[i][k])
		}
	}
	for _, w := range weights {
		put(w)
	}
	put(s.Smoothing.Value)
	if s.Smoothing.Auto {
		put(1)
	}
	if s.NoMirror {
		put(2)
	}
	return fitKey(h.Sum64())
}

func (e *fitEntry) matches(kind transform.Kind, p *Problem, weights []float64, s Settings) bool {
	if e.kind != kind || e.dim != p.Dim || e.smoothing != s.Smoothing || e.noMirror != s.NoMirror ||
		len(e.src) != len(p.Source) || len(e.weights) != len(weights) || (e.weights == nil) != (weights == nil) {
		return false
	}
	for i := range e.src {
		if e.src[i] != p.Source[i] || e.dst[i] != p.Target[i] {
			return false
		}
	}
	for i := range e.weights {
		if math.Float64bits(e.weights[i]) != math.Float64bits(weights[i]) {
			return false
		}
	}
	return true
}

// get returns the fit of these inputs made before, or nil.
func (c *fitCache) get(kind transform.Kind, p *Problem, weights []float64, s Settings) *fitted {
	if f := c.lookup(kind, p, weights, s); f != nil && f.res != nil {
		return f
	}
	return nil
}

// chosen returns the smoothing a search chose for these inputs (a spline
// with automatic smoothing) when the search ran but the fit was not made:
// the fit then needs no second search.
func (c *fitCache) chosen(kind transform.Kind, p *Problem, weights []float64, s Settings) (float64, bool) {
	if f := c.lookup(kind, p, weights, s); f != nil {
		return f.smoothing, true
	}
	return 0, false
}

func (c *fitCache) lookup(kind transform.Kind, p *Problem, weights []float64, s Settings) *fitted {
	if c == nil || c.off {
		return nil
	}
	key := hashFit(kind, p, weights, s)
	c.mu.Lock()
	defer c.mu.Unlock()
	for i := range c.fits[key] {
		if e := &c.fits[key][i]; e.matches(kind, p, weights, s) {
			return e.fit
		}
	}
	return nil
}

// put remembers the fit of these inputs, or (f.res nil) the smoothing
// chosen for them.
func (c *fitCache) put(kind transform.Kind, p *Problem, weights []float64, s Settings, f *fitted) {
	if c == nil || c.off {
		return
	}
	key := hashFit(kind, p, weights, s)
	e := fitEntry{
		kind: kind, dim: p.Dim, smoothing: s.Smoothing, noMirror: s.NoMirror, fit: f,
		src: append([]transform.Vec(nil), p.Source...), dst: append([]transform.Vec(nil), p.Target...),
	}
	if weights != nil {
		e.weights = append([]float64(nil), weights...)
	}
	c.mu.Lock()
	defer c.mu.Unlock()
	for i := range c.fits[key] {
		if c.fits[key][i].matches(kind, p, weights, s) {
			c.fits[key][i].fit = f
			return
		}
	}
	c.fits[key] = append(c.fits[key], e)
}
