package skills

import (
	"math/rand/v2"
	"testing"
)

func TestZeroAllocs(t *testing.T) {
	// Hot paths allocate nothing after the first call has sized the
	// scratch buffers.
	const ns, n = 100, 64
	rng := rand.New(rand.NewPCG(1, 5))
	var ds []Discriminator
	v, _ := NewVMF(&VMFConfig{In: ns, Dim: 8, LearnKappa: true}, rng)
	vn, _ := NewVMF(&VMFConfig{In: ns, Dim: 8, Net: NetConfig{Hidden: []int{16}, MaxBatch: 32}}, rng)
	s, _ := NewSoftmax(&SoftmaxConfig{In: ns, K: 8}, rng)
	sn, _ := NewSoftmax(&SoftmaxConfig{In: ns, K: 8, Net: NetConfig{Hidden: []int{16}}}, rng)
	vs, _ := NewVMF(&VMFConfig{In: ns, Dim: 8, Optim: OptimConfig{Method: OptimSparseAdam, ClipNorm: 1}}, rng)
	ss, _ := NewSoftmax(&SoftmaxConfig{In: ns, K: 8, Optim: OptimConfig{Method: OptimSparseAdam}}, rng)
	ds = append(ds, v, vn, s, sn, vs, ss)
	for _, d := range ds {
		var p Prior = Categorical{K: 8}
		if _, ok := d.(*VMF); ok {
			p = UniformSphere{D: 8}
		}
		x, z := make([]float64, n*ns), make([]float64, n*8)
		for i := range n {
			OneHot(x[i*ns:(i+1)*ns], rng.IntN(ns))
			p.Sample(z[i*8:(i+1)*8], rng)
		}
		phi := make([]float64, d.FeatureDim())
		w := make([]float64, d.FeatureDim())
		fm, _ := NewFeatureMap(d, nil)
		var m MIMeter
		x1, z1 := x[:ns], z[:8]
		d.Update(x, z)
		for name, f := range map[string]func(){
			"Update":      func() { d.Update(x, z) },
			"Reward":      func() { d.Reward(x1, z1) },
			"LogProb":     func() { d.LogProb(x1, z1) },
			"Features":    func() { d.Features(phi, x1) },
			"TaskVector":  func() { d.TaskVector(w, z1) },
			"FeatureMap":  func() { fm.Features(phi, 0, 0, 17) },
			"MapReward":   func() { fm.Reward(z1, 0, 0, 17) },
			"MIMeter.Add": func() { m.Add(d, p, x1, z1) },
			"Sample":      func() { p.Sample(z1, rng) },
			"VMFLogNorm":  func() { VMFLogNorm(32, 123.4) },
		} {
			if a := testing.AllocsPerRun(20, f); a != 0 {
				t.Errorf("%T %s: %g allocs per run, want 0", d, name, a)
			}
		}
	}
}
