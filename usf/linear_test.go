package usf

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/sf"
)

// TestLinearMatchesExact trains the linear USF with one-hot observations,
// psi(s, a, z) = M_{s,a} z (+ b_{s,a} with Affine), on seeded random MDPs
// over a set of d linearly independent z (d+1 with Affine), which it can
// represent exactly, and checks psi against sf.Exact of the optimal policy
// of each z as in TestTabularMatchesExact.
//
// The z are well separated (see wellSeparated): random unit vectors for
// the plain deterministic case, a rotated regular simplex for Affine, a
// random orthonormal basis for the stochastic case (well conditioned, so
// that the shared M_{s,a} does not amplify the TD noise).
//
// Tolerances: deterministic transitions with a constant step converge
// geometrically to the exact SFs: 1e-6 (measured 1e-10 and 1e-15). With
// three successors per pair and the step annealed as
// min(0.5, (1 + t/(S A))^-0.7) over t transitions: 5% (measured 2.9-3.6%).
func TestLinearMatchesExact(t *testing.T) {
	for _, tc := range []struct {
		name      string
		seed      uint64
		branching int
		terminal  float64
		affine    bool
		anneal    bool
		updates   int
		tol       float64
	}{
		{"deterministic", 5, 1, 0.25, false, false, 200_000, 1e-6},
		{"deterministic-affine", 5, 1, 0.25, true, false, 400_000, 1e-6},
		{"stochastic", 1, 3, 0, false, true, 2_400_000, 0.05},
	} {
		t.Run(tc.name, func(t *testing.T) {
			const ns, na, d = 8, 3, 3
			p := randomProblemBranching(t, tc.seed, ns, na, d, tc.branching, tc.terminal)
			rng := rand.New(rand.NewPCG(tc.seed, 77))
			k := d
			if tc.affine {
				k++
			}
			var zs [][]float64
			switch {
			case tc.affine:
				zs = separatedSet(t, p, 0.02, func() [][]float64 { return rotate(rng, simplex3()) })
			case tc.anneal:
				zs = separatedSet(t, p, 0.02, func() [][]float64 { return orthonormal(rng, d) })
			default:
				zs = wellSeparated(t, p, rng, k, d, 0.05)
			}
			lin, err := NewLinear(ns, na, d, p.gamma, &LinearConfig{Alpha: 0.5, Affine: tc.affine})
			if err != nil {
				t.Fatal(err)
			}
			sp := newSampler(p, zs)
			b := NewBatch(32, 0, d)
			for i := range tc.updates / 32 {
				if tc.anneal {
					lin.Alpha = math.Min(0.5, math.Pow(1+float64(32*i)/(ns*na), -0.7))
				}
				sp.fill(b, rng)
				if _, err := lin.Update(b); err != nil {
					t.Fatal(err)
				}
			}
			for k, z := range zs {
				ref, opt := exactUSF(t, p, z)
				if e := psiError(lin, ref, p.m, z); e > tc.tol {
					t.Errorf("z[%d]: relative max error %.3g > %g", k, e, tc.tol)
				} else {
					t.Logf("z[%d]: relative max error %.3g", k, e)
				}
				checkGreedy(t, lin, opt, p, z)
			}
		})
	}
}

// TestLinearDenseMatchesIndexed checks that one-hot X rows and integer
// states give the same bits, for Psi and Update, and Affine included.
func TestLinearDenseMatchesIndexed(t *testing.T) {
	for _, affine := range []bool{false, true} {
		p := randomProblem(t, 4, 6, 2, 3, 0.2)
		rng := rand.New(rand.NewPCG(4, 4))
		zs := unitVectors(rng, 5, 3)
		a, _ := NewLinear(6, 2, 3, p.gamma, &LinearConfig{Affine: affine})
		c, _ := NewLinear(6, 2, 3, p.gamma, &LinearConfig{Affine: affine})
		sp := newSampler(p, zs)
		b := NewBatch(8, 6, 3)
		for range 100 {
			sp.fill(b, rng)
			for i := range b.NextA {
				b.NextA[i] = rng.IntN(3) - 1 // a mix of given and greedy next actions
			}
			bs := *b
			bs.X, bs.NextX = nil, nil
			la, _ := a.Update(b)
			lc, _ := c.Update(&bs)
			if la != lc {
				t.Fatalf("affine %v: loss %v vs %v", affine, la, lc)
			}
		}
		for i := range a.W {
			if a.W[i] != c.W[i] {
				t.Fatalf("affine %v: weights differ at %d", affine, i)
			}
		}
		x := make([]float64, 6)
		x[3] = 1
		d1, d2 := make([]float64, 6), make([]float64, 6)
		a.Psi(d1, x, zs[0])
		a.PsiState(d2, 3, zs[0])
		for i := range d1 {
			if d1[i] != d2[i] {
				t.Fatalf("affine %v: Psi and PsiState differ", affine)
			}
		}
	}
}

// TestLinearHandExample checks a dense (not one-hot) update by hand:
// obs 2, 1 action, d 2, gamma 0.5, alpha 0.25, W = 0, x = (1, 2),
// z = (1, 0), phi = (1, -1), terminal next state.
// psi = 0, delta = phi = (1, -1), loss = (1 + 1)/2 = 1.
// W[i, 0, k, j] += 0.25 delta_k x_i z_j: only j = 0 changes:
// W[0,0,0,0] = 0.25, W[0,0,1,0] = -0.25, W[1,0,0,0] = 0.5, W[1,0,1,0] = -0.5.
// Then psi(x, 0, z) = sum_i x_i W[i,0,k,0] = (0.25 + 1, -0.25 - 1) = (1.25, -1.25).
// Derived by hand, see above.
func TestLinearHandExample(t *testing.T) {
	l, _ := NewLinear(2, 1, 2, 0.5, &LinearConfig{Alpha: 0.25})
	b := &Batch{
		X: []float64{1, 2}, NextX: []float64{0, 0},
		A: []int{0}, Phi: []float64{1, -1}, Z: []float64{1, 0}, Terminal: []bool{true},
	}
	loss, err := l.Update(b)
	if err != nil || loss != 1 {
		t.Fatalf("loss %v err %v, want 1", loss, err)
	}
	want := []float64{0.25, 0, -0.25, 0, 0.5, 0, -0.5, 0} // index ((i*A + a)*d + k)*d + j
	for i, v := range want {
		if l.W[i] != v {
			t.Fatalf("W = %v, want %v", l.W, want)
		}
	}
	dst := make([]float64, 2)
	l.Psi(dst, []float64{1, 2}, []float64{1, 0})
	if dst[0] != 1.25 || dst[1] != -1.25 {
		t.Fatalf("psi = %v, want [1.25 -1.25]", dst)
	}
}

func TestLinearDivergence(t *testing.T) {
	// A terminal transition with phi = 1, z = 1 and step 3 maps psi to
	// psi + 3 (1 - psi) = 3 - 2 psi: it oscillates with doubling amplitude
	// and overflows; the learner must report it, not return NaN.
	l, _ := NewLinear(1, 1, 1, 1, &LinearConfig{Alpha: 3})
	b := &Batch{S: []int{0}, Next: []int{0}, A: []int{0}, Phi: []float64{1}, Z: []float64{1}, Terminal: []bool{true}}
	var err error
	for i := 0; i < 100000 && err == nil; i++ {
		_, err = l.Update(b)
	}
	if !errors.Is(err, ErrDiverged) {
		t.Fatalf("err %v, want ErrDiverged", err)
	}
	var de *sf.DivergenceError
	// |delta| doubles per update; delta^2 overflows near 2^512, update 512.
	if !errors.As(err, &de) || de.Step < 500 || de.Step > 530 {
		t.Fatalf("err %v: want a divergence near update 512", err)
	}
	if _, err2 := l.Update(b); err2 != err {
		t.Fatal("a diverged learner must keep returning its error")
	}
}

func TestLinearZeroAllocs(t *testing.T) {
	p := randomProblem(t, 7, 10, 4, 8, 0)
	rng := rand.New(rand.NewPCG(7, 7))
	zs := unitVectors(rng, 4, 8)
	l, _ := NewLinear(10, 4, 8, p.gamma, nil)
	sp := newSampler(p, zs)
	b := NewBatch(16, 0, 8)
	sp.fill(b, rng)
	dst := make([]float64, 32)
	if n := testing.AllocsPerRun(10, func() {
		l.Update(b)
		l.PsiState(dst, 3, zs[0])
	}); n != 0 {
		t.Fatalf("%v allocs, want 0", n)
	}
}

// simplex3 returns the four vertices of a regular tetrahedron on the unit
// sphere in R^3 (pairwise dot products -1/3; from memory). The augmented
// vectors (z, 1) have Gram matrix 2 on the diagonal and 2/3 off it
// (eigenvalues 4 and 4/3), so the affine learner is well conditioned on
// them, where four random unit vectors can be nearly affinely dependent.
func simplex3() [][]float64 {
	s := 1 / math.Sqrt(3)
	return [][]float64{{s, s, s}, {s, -s, -s}, {-s, s, -s}, {-s, -s, s}}
}

// rotate returns the vectors vs turned by one random rotation.
func rotate(rng *rand.Rand, vs [][]float64) [][]float64 {
	q := orthonormal(rng, len(vs[0]))
	out := make([][]float64, len(vs))
	for i, v := range vs {
		z := make([]float64, len(v))
		for r := range z {
			z[r] = vec.Dot(q[r], v)
		}
		out[i] = z
	}
	return out
}

// separatedSet draws sets from gen until every vector in one has a
// relative action gap of at least minGap (see wellSeparated).
func separatedSet(t testing.TB, p problem, minGap float64, gen func() [][]float64) [][]float64 {
	t.Helper()
	for tries := 0; tries < 2000; tries++ {
		zs := gen()
		ok := true
		for _, z := range zs {
			ref, _ := exactUSF(t, p, z)
			if actionGap(ref, p.m, z) < minGap {
				ok = false
				break
			}
		}
		if ok {
			return zs
		}
	}
	t.Fatalf("no well-separated set (gap %v)", minGap)
	return nil
}

// orthonormal returns a random n x n orthogonal matrix (Gram-Schmidt on
// Gaussian vectors), as rows.
func orthonormal(rng *rand.Rand, n int) [][]float64 {
	q := make([][]float64, n)
	for i := range q {
		for {
			v := make([]float64, n)
			for j := range v {
				v[j] = rng.NormFloat64()
			}
			for _, u := range q[:i] {
				c := vec.Dot(u, v)
				for j := range v {
					v[j] -= c * u[j]
				}
			}
			if nv := math.Sqrt(vec.Dot(v, v)); nv > 1e-6 {
				for j := range v {
					v[j] /= nv
				}
				q[i] = v
				break
			}
		}
	}
	return q
}
