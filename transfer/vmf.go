package transfer

import "math"

// logVMFNorm returns log C_d(kappa), the log normalising constant of the von
// Mises-Fisher density kappa-concentrated on S^{d-1} with respect to the
// surface measure:
//
//	C_d(kappa) = kappa^{d/2-1} / ((2 pi)^{d/2} I_{d/2-1}(kappa)).
//
// (Mardia & Jupp 2000, section 9.3.) For d = 3 it equals
// kappa / (4 pi sinh kappa).
func logVMFNorm(d int, kappa float64) float64 {
	v := float64(d)/2 - 1
	return v*math.Log(kappa) - float64(d)/2*math.Log(2*math.Pi) - logBesselI(v, kappa)
}

// logBesselI returns log I_v(x) for v >= 0 and x > 0 from the power series
//
//	I_v(x) = sum_{k>=0} (x/2)^{2k+v} / (k! Gamma(k+v+1))
//
// summed in log space (Abramowitz & Stegun 9.6.10). All terms are positive;
// the sum stops once k is past the largest term and the terms have fallen
// 40 nats below it, which bounds the relative truncation error by about
// e^-40 times the number of remaining significant terms.
func logBesselI(v, x float64) float64 {
	lx := math.Log(x / 2)
	lg := func(t float64) float64 { r, _ := math.Lgamma(t); return r }
	term := func(k float64) float64 { return (2*k+v)*lx - lg(k+1) - lg(k+v+1) }
	// The largest term is near k = x/2.
	kmax := math.Max(0, math.Floor(x/2))
	m := term(kmax)
	var s float64
	for k := kmax; k >= 0; k-- {
		t := term(k) - m
		s += math.Exp(t)
		if t < -40 {
			break
		}
	}
	for k := kmax + 1; ; k++ {
		t := term(k) - m
		s += math.Exp(t)
		if t < -40 {
			break
		}
	}
	return m + math.Log(s)
}

// logSphereArea returns log of the surface area of S^{d-1},
// 2 pi^{d/2} / Gamma(d/2).
func logSphereArea(d int) float64 {
	lg, _ := math.Lgamma(float64(d) / 2)
	return math.Log(2) + float64(d)/2*math.Log(math.Pi) - lg
}
