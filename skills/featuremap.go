package skills

import (
	"fmt"

	"github.com/successor-go/successor/internal/vec"
)

// OneHot writes the one-hot observation of state s into dst: zeros and a 1
// at index s. It panics if s is not in [0, len(dst)).
func OneHot(dst []float64, s int) {
	clear(dst)
	dst[s] = 1
}

// MapConfig configures a FeatureMap. The zero value means one-hot state
// observations and a live map.
type MapConfig struct {
	// Observe writes the observation of integer state s into dst (len
	// InDim of the discriminator). Nil means OneHot.
	Observe func(dst []float64, s int)
	// Frozen makes the map use a snapshot copy of the discriminator taken
	// at construction, so later updates of the original do not change the
	// features. False means live: the map reads the discriminator as it is
	// at each call.
	Frozen bool
	// States, if positive with Frozen, tabulates phi for states
	// 0..States-1 at construction; Features then only copies a row, and
	// panics for next outside that range.
	States int
}

// FeatureMap presents a Discriminator as transition features over integer
// states,
//
//	phi(s, a, s') = d.Features(observe(s')),
//
// the features of the next state, with the methods Dim and Features of the
// sf package's FeatureMap interface; a *FeatureMap can be used wherever
// that interface is expected. TaskVector gives the matching weights of a
// skill. A FeatureMap is not safe for concurrent use.
type FeatureMap struct {
	d     Discriminator
	obs   func(dst []float64, s int)
	x     []float64
	table []float64 // States x Dim when tabulated
	w     []float64 // task vector scratch for Reward
	dim   int
}

// NewFeatureMap returns the feature map of d. A nil cfg means the zero
// MapConfig. It returns an error wrapping ErrUnsupported if cfg.Frozen is
// set and d has no Clone method, and one wrapping ErrConfig if cfg.States
// is negative or set without Frozen.
func NewFeatureMap(d Discriminator, cfg *MapConfig) (*FeatureMap, error) {
	var c MapConfig
	if cfg != nil {
		c = *cfg
	}
	if c.States < 0 || c.States > 0 && !c.Frozen {
		return nil, fmt.Errorf("skills: new feature map: states %d needs frozen and >= 0: %w", c.States, ErrConfig)
	}
	if c.Observe == nil {
		c.Observe = OneHot
	}
	if c.Frozen {
		cl, ok := d.(interface{ Clone() Discriminator })
		if !ok {
			return nil, fmt.Errorf("skills: new feature map: freeze %T: %w", d, ErrUnsupported)
		}
		d = cl.Clone()
	}
	m := &FeatureMap{d: d, obs: c.Observe, x: make([]float64, d.InDim()), w: make([]float64, d.FeatureDim()), dim: d.FeatureDim()}
	if c.States > 0 {
		m.table = make([]float64, c.States*m.dim)
		for s := range c.States {
			m.obs(m.x, s)
			d.Features(m.table[s*m.dim:(s+1)*m.dim], m.x)
		}
	}
	return m, nil
}

// Dim returns the number of features, d.FeatureDim().
func (m *FeatureMap) Dim() int { return m.dim }

// Features writes phi(s, a, next) = Features(observe(next)) into dst; s and
// a are ignored. It panics if len(dst) != Dim() or next is out of range.
func (m *FeatureMap) Features(dst []float64, s, a, next int) {
	if len(dst) != m.dim {
		panic(fmt.Sprintf("skills: feature map: len(dst) = %d, want %d", len(dst), m.dim))
	}
	if m.table != nil {
		copy(dst, m.table[next*m.dim:(next+1)*m.dim])
		return
	}
	m.obs(m.x, next)
	m.d.Features(dst, m.x)
}

// TaskVector writes the task vector w of skill z into dst (len Dim), so
// that Features(dst, s, a, next) . w is the intrinsic reward of the
// transition under skill z. It panics if a length is wrong.
func (m *FeatureMap) TaskVector(dst, z []float64) { m.d.TaskVector(dst, z) }

// Reward returns the intrinsic reward of the transition (s, a, next) under
// skill z, phi(s, a, next) . TaskVector(z). It panics if len(z) is wrong or
// next is out of range.
func (m *FeatureMap) Reward(z []float64, s, a, next int) float64 {
	if m.table != nil {
		m.d.TaskVector(m.w, z)
		return vec.DotSeq(m.table[next*m.dim:(next+1)*m.dim], m.w)
	}
	m.obs(m.x, next)
	return m.d.Reward(m.x, z)
}

// Discriminator returns the discriminator the map reads: the original when
// live, the snapshot when frozen.
func (m *FeatureMap) Discriminator() Discriminator { return m.d }

// The method set of the sf package's FeatureMap interface, pinned here
// without importing sf.
var _ interface {
	Dim() int
	Features(dst []float64, s, a, next int)
} = (*FeatureMap)(nil)
