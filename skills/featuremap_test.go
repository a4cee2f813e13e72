package skills

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
)

func TestFeatureMapLiveFrozen(t *testing.T) {
	// phi(s, a, s') = Features(onehot(s')): independent of s and a; a
	// frozen map keeps the features of construction time, a live one
	// follows updates; the tabulated frozen map equals the frozen one; and
	// phi . TaskVector(z) is the discriminator's reward.
	const ns = 6
	rng := rand.New(rand.NewPCG(2, 2))
	v, _ := NewVMF(&VMFConfig{In: ns, Dim: 3, Optim: OptimConfig{StepSize: 0.1}}, rng)
	s, _ := NewSoftmax(&SoftmaxConfig{In: ns, K: 3, Optim: OptimConfig{StepSize: 0.1}}, rng)
	for _, d := range []Discriminator{v, s} {
		live, err := NewFeatureMap(d, nil)
		if err != nil {
			t.Fatal(err)
		}
		frozen, err := NewFeatureMap(d, &MapConfig{Frozen: true})
		if err != nil {
			t.Fatal(err)
		}
		table, err := NewFeatureMap(d, &MapConfig{Frozen: true, States: ns})
		if err != nil {
			t.Fatal(err)
		}
		fd := d.FeatureDim()
		if live.Dim() != fd {
			t.Fatalf("Dim %d, want %d", live.Dim(), fd)
		}
		a, b, c := make([]float64, fd), make([]float64, fd), make([]float64, fd)
		x := make([]float64, ns)
		snapshot := make([]float64, ns*fd)
		for next := range ns {
			live.Features(a, 0, 0, next)
			live.Features(b, 5, 1, next)
			OneHot(x, next)
			d.Features(c, x)
			for i := range a {
				if a[i] != b[i] || a[i] != c[i] {
					t.Fatalf("%T: features of next %d depend on s, a or differ from the discriminator", d, next)
				}
			}
			copy(snapshot[next*fd:], a)
		}
		// Train the original.
		xs, zs := randBatch(rng, 16, ns, Categorical{K: 3})
		for range 20 {
			d.Update(xs, zs)
		}
		changed := false
		for next := range ns {
			frozen.Features(a, 0, 0, next)
			table.Features(b, 0, 0, next)
			live.Features(c, 0, 0, next)
			for i := range a {
				want := snapshot[next*fd+i]
				if a[i] != want || b[i] != want {
					t.Fatalf("%T: frozen features moved after updates", d)
				}
				if c[i] != want {
					changed = true
				}
			}
			// Reward identity through the map.
			z := []float64{0, 1, 0}
			w := make([]float64, fd)
			live.TaskVector(w, z)
			OneHot(x, next)
			if r, pr := d.Reward(x, z), vec.DotSeq(c, w); math.Abs(r-pr) > 1e-14 {
				t.Errorf("%T: phi . w = %g, reward %g", d, pr, r)
			}
			if r, mr := d.Reward(x, z), live.Reward(z, 1, 0, next); r != mr {
				t.Errorf("%T: map reward %g, discriminator reward %g", d, mr, r)
			}
			frozen.Features(a, 0, 0, next)
			if fr, tr := frozen.Reward(z, 0, 0, next), table.Reward(z, 0, 0, next); math.Abs(fr-vec.DotSeq(a, w)) > 1e-14 || math.Abs(tr-fr) > 1e-14 {
				t.Errorf("%T: frozen reward %g, tabulated %g, phi . w %g", d, fr, tr, vec.DotSeq(a, w))
			}
		}
		if !changed {
			t.Errorf("%T: live features did not follow the updates", d)
		}
		if live.Discriminator() != d || frozen.Discriminator() == d {
			t.Errorf("%T: Discriminator() of live/frozen maps wrong", d)
		}
	}
}

func TestFeatureMapObserve(t *testing.T) {
	// A custom observation: state s on a 1-D corridor observed as (s, 1).
	rng := rand.New(rand.NewPCG(2, 3))
	v, _ := NewVMF(&VMFConfig{In: 2, Dim: 4}, rng)
	obs := func(dst []float64, s int) { dst[0], dst[1] = float64(s), 1 }
	m, err := NewFeatureMap(v, &MapConfig{Observe: obs})
	if err != nil {
		t.Fatal(err)
	}
	a, b := make([]float64, 4), make([]float64, 4)
	m.Features(a, 0, 0, 3)
	v.Features(b, []float64{3, 1})
	for i := range a {
		if a[i] != b[i] {
			t.Fatalf("custom observation: %v, want %v", a, b)
		}
	}
}

func TestFeatureMapErrors(t *testing.T) {
	if _, err := NewFeatureMap(fixedDisc{}, &MapConfig{Frozen: true}); !errors.Is(err, ErrUnsupported) {
		t.Errorf("freezing a discriminator without Clone: %v, want ErrUnsupported", err)
	}
	if _, err := NewFeatureMap(fixedDisc{}, &MapConfig{States: 3}); !errors.Is(err, ErrConfig) {
		t.Errorf("States without Frozen: %v, want ErrConfig", err)
	}
}
