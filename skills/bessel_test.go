package skills

import (
	"math"
	"math/big"
	"testing"
)

// bigLogBesselI returns log I_nu(x) with the power series
// I_nu(x) = (x/2)^nu / Gamma(nu+1) * sum_k (x^2/4)^k / (k! (nu+1)_k)
// (Abramowitz & Stegun 9.6.10) summed in 256-bit floating point, for any
// x >= 0 (big.Float has no practical exponent limit). The prefactor is
// taken in float64 (relative error ~1e-16).
func bigLogBesselI(nu, x float64) float64 {
	const prec = 256
	q := new(big.Float).SetPrec(prec).SetFloat64(x * x / 4)
	s := new(big.Float).SetPrec(prec).SetFloat64(1)
	t := new(big.Float).SetPrec(prec).SetFloat64(1)
	den := new(big.Float).SetPrec(prec)
	tol := new(big.Float).SetPrec(prec)
	for k := 1; k < 100000; k++ {
		fk := float64(k)
		t.Mul(t, q)
		den.SetFloat64(fk * (nu + fk)) // exact: small integers and halves
		t.Quo(t, den)
		s.Add(s, t)
		tol.SetMantExp(s, -220)
		if fk*(nu+fk) > x*x/4 && t.Cmp(tol) < 0 {
			break
		}
	}
	mant := new(big.Float)
	exp := s.MantExp(mant)
	m, _ := mant.Float64()
	lg, _ := math.Lgamma(nu + 1)
	lead := 0.0
	if nu > 0 {
		lead = nu * math.Log(x/2)
	}
	return lead - lg + math.Log(m) + float64(exp)*math.Ln2
}

func TestLogBesselIHandbook(t *testing.T) {
	// exp(-x) I_0(x) and exp(-x) I_1(x): Abramowitz & Stegun, Table 9.8
	// (values from memory, 10 decimals; the big-float test below checks
	// the same points independently).
	for _, tc := range []struct {
		x, i0, i1 float64
	}{
		{1, 0.4657596076, 0.2079104153},
		{2, 0.3085083226, 0.2152692892},
		{5, 0.1835408126, 0.1639722669},
		{10, 0.1278333372, 0.1212626814},
	} {
		const tol = 1e-10 // half a unit in the 10th decimal, plus rounding
		if got := math.Exp(logBesselI(0, tc.x) - tc.x); math.Abs(got-tc.i0) > tol {
			t.Errorf("exp(-x) I_0(%g) = %.12f, table %.10f", tc.x, got, tc.i0)
		}
		if got := math.Exp(logBesselI(1, tc.x) - tc.x); math.Abs(got-tc.i1) > tol {
			t.Errorf("exp(-x) I_1(%g) = %.12f, table %.10f", tc.x, got, tc.i1)
		}
	}
}

func TestLogBesselIBigSeries(t *testing.T) {
	// Both branches (series up to 30, uniform asymptotic above) against a
	// 256-bit evaluation of the same power series: relative error of
	// I_nu(x) below 1e-13, i.e. |delta log I| < 1e-13 max(1, |log I|).
	xs := []float64{1e-3, 0.5, 1, 7, 19.5, 29.99, 30, 30.01, 31, 45, 80, 150, 400, 700, 1000}
	nus := []float64{0, 0.5, 1, 1.5, 3, 7.5, 15, 15.5, 31}
	for _, nu := range nus {
		for _, x := range xs {
			want := bigLogBesselI(nu, x)
			got := logBesselI(nu, x)
			if d := math.Abs(got - want); d > 1e-13*math.Max(1, math.Abs(want)) || math.IsNaN(got) {
				t.Errorf("log I_%g(%g) = %.17g, 256-bit series %.17g (diff %.2g)", nu, x, got, want, d)
			}
		}
	}
}

// logSinh returns log sinh(x) for x > 0 without overflow.
func logSinh(x float64) float64 {
	if x < 20 {
		return math.Log(math.Sinh(x))
	}
	return x - math.Ln2 + math.Log1p(-math.Exp(-2*x))
}

func TestLogBesselIHalfOrder(t *testing.T) {
	// Modified spherical Bessel functions, Abramowitz & Stegun 10.2.13-10.2.14:
	//   I_{1/2}(x) = sqrt(2/(pi x)) sinh x,
	//   I_{3/2}(x) = sqrt(2/(pi x)) (cosh x - sinh x / x),
	// the second written as log(x cosh x - sinh x) = x - log 2 + log((x-1) + (x+1) e^{-2x})
	// to avoid overflow (derived by hand, see comment).
	for _, x := range []float64{1, 2.5, 10, 29, 30.5, 60, 200, 999} {
		want := 0.5*math.Log(2/(math.Pi*x)) + logSinh(x)
		if got := logBesselI(0.5, x); math.Abs(got-want) > 1e-13*math.Max(1, math.Abs(want)) {
			t.Errorf("log I_1/2(%g) = %.17g, closed form %.17g", x, got, want)
		}
		want = 0.5*math.Log(2/(math.Pi*x)) - math.Log(x) + x - math.Ln2 + math.Log((x-1)+(x+1)*math.Exp(-2*x))
		if got := logBesselI(1.5, x); math.Abs(got-want) > 1e-13*math.Max(1, math.Abs(want)) {
			t.Errorf("log I_3/2(%g) = %.17g, closed form %.17g", x, got, want)
		}
	}
}

func TestLogBesselISpecial(t *testing.T) {
	for _, tc := range []struct {
		nu, x, want float64
	}{
		{0, 0, 0},
		{1, 0, math.Inf(-1)},
		{2, math.Inf(1), math.Inf(1)},
		{-1, 1, math.NaN()},
		{1, -1, math.NaN()},
		{math.NaN(), 1, math.NaN()},
	} {
		got := logBesselI(tc.nu, tc.x)
		if !(got == tc.want || math.IsNaN(got) && math.IsNaN(tc.want)) {
			t.Errorf("logBesselI(%g, %g) = %g, want %g", tc.nu, tc.x, got, tc.want)
		}
	}
}

func TestLogSphereArea(t *testing.T) {
	// Areas of unit spheres (from memory): S^0 two points, S^1 = 2 pi,
	// S^2 = 4 pi, S^3 = 2 pi^2, S^4 = 8 pi^2 / 3.
	for _, tc := range []struct {
		d    int
		area float64
	}{
		{1, 2}, {2, 2 * math.Pi}, {3, 4 * math.Pi}, {4, 2 * math.Pi * math.Pi}, {5, 8 * math.Pi * math.Pi / 3},
	} {
		if got := LogSphereArea(tc.d); math.Abs(got-math.Log(tc.area)) > 1e-14 {
			t.Errorf("LogSphereArea(%d) = %.17g, want log %.17g", tc.d, got, tc.area)
		}
	}
	if !math.IsNaN(LogSphereArea(0)) {
		t.Error("LogSphereArea(0) is not NaN")
	}
}

func TestVMFLogNormD3(t *testing.T) {
	// On S^2, C_3(kappa) = kappa / (4 pi sinh kappa) relative to the surface
	// measure (Mardia & Jupp 2000, Directional Statistics, ch. 9, give
	// kappa / sinh kappa relative to the uniform probability measure on
	// S^2; dividing by the area 4 pi converts it).
	for _, k := range []float64{1e-10, 1e-4, 0.3, 1, 4, 17, 29.999, 30, 30.001, 77, 250, 600, 1000} {
		want := math.Log(k) - math.Log(4*math.Pi) - logSinh(k)
		got := VMFLogNorm(3, k)
		if math.Abs(got-want) > 1e-13*math.Max(1, math.Abs(want)) {
			t.Errorf("log C_3(%g) = %.17g, closed form %.17g", k, got, want)
		}
	}
}

func TestVMFLogNormSmallKappa(t *testing.T) {
	// kappa -> 0: the uniform density 1/area(S^{d-1}); 1/(2 pi) on the
	// circle and 1/(4 pi) on S^2 (from memory). For small kappa,
	// log C_d(kappa) = -log area - kappa^2/(2d) + O(kappa^4), from the first
	// two terms of the series of I_nu with nu = d/2 - 1 (derived by hand).
	if got, want := VMFLogNorm(2, 0), -math.Log(2*math.Pi); math.Abs(got-want) > 1e-15 {
		t.Errorf("log C_2(0) = %.17g, want -log(2 pi) = %.17g", got, want)
	}
	if got, want := VMFLogNorm(3, 0), -math.Log(4*math.Pi); math.Abs(got-want) > 1e-15 {
		t.Errorf("log C_3(0) = %.17g, want -log(4 pi) = %.17g", got, want)
	}
	for _, d := range []int{2, 3, 5, 8, 32, 64} {
		for _, k := range []float64{0, 1e-8, 1e-3} {
			want := -LogSphereArea(d) - k*k/float64(2*d)
			if got := VMFLogNorm(d, k); math.Abs(got-want) > 1e-12 {
				t.Errorf("log C_%d(%g) = %.17g, want %.17g", d, k, got, want)
			}
			// A_d(kappa) = kappa/d - kappa^3/(d^2 (d+2)) + O(kappa^5), the
			// ratio of the two series (derived by hand).
			fd := float64(d)
			if got, want := VMFMeanLength(d, k), k/fd-k*k*k/(fd*fd*(fd+2)); math.Abs(got-want) > 1e-12*k { // omitted term is O(kappa^4) relative
				t.Errorf("A_%d(%g) = %.17g, want %.17g", d, k, got, want)
			}
		}
		if VMFMeanLength(d, 0) != 0 {
			t.Errorf("A_%d(0) = %g, want 0", d, VMFMeanLength(d, 0))
		}
	}
}

func TestVMFLogNormStable(t *testing.T) {
	// For d up to 64 and kappa up to 1000: finite, non-increasing in kappa
	// (d/dkappa log C_d = -A_d(kappa) < 0), derivative equal to -A_d
	// (central differences, relative 1e-6), 0 < A_d < 1 increasing.
	ks := []float64{0, 1e-12, 1e-6, 1e-3, 0.1, 0.5, 1, 2, 5, 10, 20, 29.9, 29.999, 30, 30.001, 30.1, 40, 64, 100, 200, 400, 700, 900, 999, 1000}
	for _, d := range []int{2, 3, 4, 5, 8, 16, 31, 32, 33, 63, 64} {
		prevC, prevA := math.Inf(1), -1.0
		for _, k := range ks {
			c := VMFLogNorm(d, k)
			a := VMFMeanLength(d, k)
			if !isFinite(c) || !isFinite(a) {
				t.Fatalf("d=%d kappa=%g: log C = %g, A = %g", d, k, c, a)
			}
			if c > prevC {
				t.Errorf("d=%d: log C increases at kappa=%g: %.17g > %.17g", d, k, c, prevC)
			}
			if a < prevA || a >= 1 || a < 0 {
				t.Errorf("d=%d kappa=%g: A = %.17g (previous %.17g)", d, k, a, prevA)
			}
			prevC, prevA = c, a
			if k >= 0.1 {
				h := 1e-5 * k
				fd := (VMFLogNorm(d, k+h) - VMFLogNorm(d, k-h)) / (2 * h)
				if math.Abs(fd+a) > 1e-6*a+1e-9 {
					t.Errorf("d=%d kappa=%g: d log C/dkappa = %.12g by differences, -A = %.12g", d, k, fd, -a)
				}
			}
		}
	}
}

func TestVMFLogNormSpecial(t *testing.T) {
	for _, tc := range []struct {
		d               int
		k, wantC, wantA float64
	}{
		{1, 1, math.NaN(), math.NaN()},
		{3, -1, math.NaN(), math.NaN()},
		{3, math.NaN(), math.NaN(), math.NaN()},
		{3, math.Inf(1), math.Inf(-1), 1},
	} {
		c, a := VMFLogNorm(tc.d, tc.k), VMFMeanLength(tc.d, tc.k)
		same := func(x, y float64) bool { return x == y || math.IsNaN(x) && math.IsNaN(y) }
		if !same(c, tc.wantC) || !same(a, tc.wantA) {
			t.Errorf("d=%d kappa=%g: log C = %g, A = %g; want %g, %g", tc.d, tc.k, c, a, tc.wantC, tc.wantA)
		}
	}
}

func TestVMFLogNormBigSeries(t *testing.T) {
	// log C_d(kappa) = nu log kappa - (d/2) log(2 pi) - log I_nu(kappa),
	// nu = d/2 - 1, with log I_nu from the 256-bit series.
	for _, d := range []int{2, 4, 8, 17, 32, 33, 64} {
		nu := float64(d)/2 - 1
		for _, k := range []float64{1e-3, 0.7, 12, 29.9, 30.1, 88, 333, 1000} {
			want := nu*math.Log(k) - float64(d)/2*math.Log(2*math.Pi) - bigLogBesselI(nu, k)
			if got := VMFLogNorm(d, k); math.Abs(got-want) > 1e-13*math.Max(1, math.Abs(want)) {
				t.Errorf("log C_%d(%g) = %.17g, via 256-bit series %.17g", d, k, got, want)
			}
		}
	}
}
