package nn

import (
	"math"
	"testing"
)

// TestAdamStep checks two Adam updates against values derived by hand from
// Kingma & Ba 2015, Algorithm 1. On the first step the bias-corrected
// moments are m^ = g and v^ = g^2, so each parameter moves by
// -lr g / (|g| + eps), about -lr sign(g) (the paper's section 2.1).
func TestAdamStep(t *testing.T) {
	const tol = 1e-15 // a few roundings of values near 1
	o := NewAdam(3, &AdamConfig{StepSize: 0.1, Eps: 1e-8})
	p := []float64{1, -2, 0.5}
	g := []float64{4, -0.25, 0}
	o.Step(p, g)
	want := []float64{
		1 - 0.1*4/(4+1e-8),
		-2 + 0.1*0.25/(0.25+1e-8),
		0.5, // zero gradient: m = v = 0, no move
	}
	for i := range p {
		if math.Abs(p[i]-want[i]) > tol {
			t.Errorf("step 1: p[%d] = %v, want %v", i, p[i], want[i])
		}
	}
	// Second step with gradient g2 on parameter 0 (derived by hand):
	// m = 0.9*0.1*4 + 0.1*g2, v = 0.999*0.001*16 + 0.001*g2^2,
	// m^ = m / (1 - 0.81), v^ = v / (1 - 0.998001).
	g2 := []float64{2, 0, 0}
	o.Step(p, g2)
	m := 0.9*(0.1*4) + 0.1*2
	v := 0.999*(0.001*16) + 0.001*4
	mh, vh := m/(1-0.9*0.9), v/(1-0.999*0.999)
	w0 := want[0] - 0.1*mh/(math.Sqrt(vh)+1e-8)
	if math.Abs(p[0]-w0) > tol {
		t.Errorf("step 2: p[0] = %v, want %v", p[0], w0)
	}
	if o.T != 2 {
		t.Errorf("T = %d, want 2", o.T)
	}
}

func TestAdamClone(t *testing.T) {
	o := NewAdam(2, &AdamConfig{StepSize: 0.05, Beta1: 0.8})
	p := []float64{1, 2}
	o.Step(p, []float64{0.3, -0.7})
	c := o.Clone()
	q := append([]float64(nil), p...)
	// The clone and the original take the same next step...
	o.Step(p, []float64{0.1, 0.2})
	c.Step(q, []float64{0.1, 0.2})
	for i := range p {
		if math.Float64bits(p[i]) != math.Float64bits(q[i]) {
			t.Errorf("p[%d]: original %v, clone %v", i, p[i], q[i])
		}
	}
	// ...and share no memory: resetting one leaves the other.
	c.Reset()
	if o.T != 2 || o.M[0] == 0 || o.V[1] == 0 {
		t.Errorf("Reset of the clone changed the original: T = %d, M = %v, V = %v", o.T, o.M, o.V)
	}
	if c.StepSize != 0.05 || c.Beta1 != 0.8 {
		t.Errorf("clone hyperparameters StepSize %v, Beta1 %v", c.StepSize, c.Beta1)
	}
}

// TestAdamDefaults checks the defaults against Kingma & Ba 2015, the
// caption of Algorithm 1 (alpha = 0.001, beta1 = 0.9, beta2 = 0.999,
// eps = 1e-8), and that set fields are kept.
func TestAdamDefaults(t *testing.T) {
	want := AdamConfig{StepSize: 0.001, Beta1: 0.9, Beta2: 0.999, Eps: 1e-8}
	if got := (AdamConfig{}).WithDefaults(); got != want {
		t.Errorf("zero config: %+v, want %+v", got, want)
	}
	if o := NewAdam(1, nil); (AdamConfig{o.StepSize, o.Beta1, o.Beta2, o.Eps}) != want {
		t.Errorf("NewAdam(nil): %+v", o)
	}
	set := AdamConfig{StepSize: 0.5, Beta2: 0.9}
	want.StepSize, want.Beta2 = 0.5, 0.9
	if got := set.WithDefaults(); got != want {
		t.Errorf("partial config: %+v, want %+v", got, want)
	}
}
