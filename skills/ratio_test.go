package skills

import (
	"math"
	"math/big"
	"testing"
)

// bigBesselRatio returns I_{nu+1}(x) / I_nu(x) from the power series of
// both (Abramowitz & Stegun 9.6.10) summed in 256-bit floating point:
// I_{nu+1}/I_nu = x/(2(nu+1)) S_{nu+1}/S_nu with
// S_nu = sum_k (x^2/4)^k / (k! (nu+1)_k). An evaluation independent of the
// continued fraction; its cost grows like x.
func bigBesselRatio(nu, x float64) float64 {
	const prec = 256
	series := func(nu float64) *big.Float {
		q := new(big.Float).SetPrec(prec).SetFloat64(x * x / 4)
		s := new(big.Float).SetPrec(prec).SetFloat64(1)
		t := new(big.Float).SetPrec(prec).SetFloat64(1)
		den := new(big.Float).SetPrec(prec)
		tol := new(big.Float).SetPrec(prec)
		for k := 1; k < 1000000; k++ {
			fk := float64(k)
			t.Mul(t, q)
			den.SetFloat64(fk * (nu + fk)) // exact: integers and halves below 2^53
			t.Quo(t, den)
			s.Add(s, t)
			tol.SetMantExp(s, -220)
			if fk*(nu+fk) > x*x/4 && t.Cmp(tol) < 0 {
				break
			}
		}
		return s
	}
	r := new(big.Float).SetPrec(prec).Quo(series(nu+1), series(nu))
	r.Mul(r, new(big.Float).SetPrec(prec).SetFloat64(x/(2*(nu+1))))
	v, _ := r.Float64()
	return v
}

// a3 returns A_3(kappa) = coth kappa - 1/kappa: with I_{1/2}(x) =
// sqrt(2/(pi x)) sinh x and I_{3/2}(x) = sqrt(2/(pi x)) (cosh x - sinh x/x)
// (Abramowitz & Stegun 10.2.13 and the recurrence 9.6.26, from memory),
// I_{3/2}/I_{1/2} = coth x - 1/x (derived by hand). Evaluated in 256-bit
// floating point for kappa >= 1, where nothing cancels badly:
// coth x = 1 + 2 e^{-2x} / (1 - e^{-2x}).
func a3(kappa float64) float64 {
	const prec = 256
	e := math.Exp(-2 * kappa) // relative error 1e-16 in a term below 0.16
	be := new(big.Float).SetPrec(prec).SetFloat64(e)
	den := new(big.Float).SetPrec(prec).Sub(big.NewFloat(1).SetPrec(prec), be)
	c := new(big.Float).SetPrec(prec).Quo(new(big.Float).SetPrec(prec).Mul(big.NewFloat(2), be), den)
	c.Add(c, big.NewFloat(1))
	c.Sub(c, new(big.Float).SetPrec(prec).Quo(big.NewFloat(1).SetPrec(prec), new(big.Float).SetPrec(prec).SetFloat64(kappa)))
	v, _ := c.Float64()
	return v
}

// TestVMFMeanLengthMonotone reproduces the failure of the ratio formed as
// exp(log I_{v+1} - log I_v): in 2000 steps of 0.05 from kappa = 7.8e4
// with d = 3 it decreased 330 times and was 3e-11 off coth k - 1/k. The
// continued fraction must not decrease there (each step raises A_3 by
// about 0.05/kappa^2 = 8e-12) and must match the closed form to 5e-16.
func TestVMFMeanLengthMonotone(t *testing.T) {
	for _, start := range []float64{7.8e4, 1000, 1e5} {
		prev := 0.0
		var decreases int
		var worst float64
		for i := range 2000 {
			k := start + 0.05*float64(i)
			a := VMFMeanLength(3, k)
			if a < prev {
				decreases++
			}
			prev = a
			worst = max(worst, math.Abs(a-a3(k))/a3(k))
		}
		if decreases > 0 {
			t.Errorf("from kappa %g: A_3 decreases %d times in 2000 steps of 0.05", start, decreases)
		}
		if worst > 5e-16 {
			t.Errorf("from kappa %g: relative error against coth k - 1/k up to %.2g, want <= 5e-16", start, worst)
		}
	}
}

// TestVMFMeanLengthAccuracy checks the documented accuracy: relative error
// below 5e-16 (about two ulps) against coth k - 1/k (d = 3) on a
// logarithmic grid from 1 to 1e12, and against the 256-bit series of both
// Bessel functions for other d from kappa = 1e-9 to 5000.
func TestVMFMeanLengthAccuracy(t *testing.T) {
	const tol = 5e-16
	for e := 0.0; e <= 12; e += 0.0625 {
		k := math.Pow(10, e)
		if got, want := VMFMeanLength(3, k), a3(k); math.Abs(got-want) > tol*want {
			t.Errorf("A_3(%g) = %.17g, coth k - 1/k = %.17g (relative %.2g)", k, got, want, math.Abs(got-want)/want)
		}
	}
	if testing.Short() {
		return
	}
	for _, d := range []int{2, 3, 4, 5, 8, 17, 32, 33, 64} {
		nu := float64(d)/2 - 1
		for _, k := range []float64{1e-9, 1e-3, 0.7, 12, 29.9, 30.1, 88, 333, 1000, 5000} {
			want := bigBesselRatio(nu, k)
			if got := VMFMeanLength(d, k); math.Abs(got-want) > tol*want {
				t.Errorf("A_%d(%g) = %.17g, 256-bit series %.17g (relative %.2g)", d, k, got, want, math.Abs(got-want)/want)
			}
		}
	}
}

// TestAmosBounds checks numerically the bounds besselRatio starts from
// (recalled from Amos 1974): lower <= r_nu(x) <= upper, against the
// 256-bit series.
func TestAmosBounds(t *testing.T) {
	for _, nu := range []float64{0, 0.5, 1, 3.5, 15, 31} {
		for _, x := range []float64{1e-3, 0.5, 3, 20, 150, 900} {
			r := bigBesselRatio(nu, x)
			lo := x / (nu + 0.5 + math.Hypot(x, nu+1.5))
			hi := x / (nu + 0.5 + math.Hypot(x, nu+0.5))
			if !(lo <= r*(1+1e-15) && r <= hi*(1+1e-15)) {
				t.Errorf("nu %g x %g: r = %.17g outside [%.17g, %.17g]", nu, x, r, lo, hi)
			}
		}
	}
}

// TestVMFMeanLengthExtremes checks that huge and tiny kappa give finite
// values in [0, 1] without running long (the starting value uses Hypot,
// so x^2 cannot overflow).
func TestVMFMeanLengthExtremes(t *testing.T) {
	for _, k := range []float64{math.SmallestNonzeroFloat64, 1e-300, 1e300, math.MaxFloat64} {
		for _, d := range []int{2, 3, 64} {
			a := VMFMeanLength(d, k)
			if !(a >= 0 && a <= 1) {
				t.Errorf("A_%d(%g) = %g, want a value in [0, 1]", d, k, a)
			}
		}
	}
	if a := VMFMeanLength(3, 1e300); a != 1 {
		t.Errorf("A_3(1e300) = %.17g, want 1 (1 - 1/kappa rounds to 1)", a)
	}
	if a, want := VMFMeanLength(2, 1e-300), 0.5e-300; math.Abs(a-want) > 1e-16*want {
		t.Errorf("A_2(1e-300) = %g, want kappa/2 = %g", a, want)
	}
}
