package sf

// The row arithmetic of the TD learners, one kernel per kind of target:
// kernelRow bootstraps from one row of the next state (Sampled, Greedy;
// their most common case, sparse features and a step below 1, is written
// out in TD.update), kernelExpected from the policy's mixture of the next
// state's rows (Expected), kernelTerminal from nothing (a terminal next
// state), and kernelDelta forms the TD error of TDLambda. Each reads and
// writes every entry of the updated row once and returns the sum of the new
// row (or of the TD error), which is finite exactly when the row is (up to
// overflow of the sum itself): divergence detection at the cost of one
// addition per entry. The unrolled loops work on resliced views, so the
// compiler drops the bounds checks.

// step holds the scalars of an update with step size alpha and discount
// gamma: om = 1 - alpha, ag = alpha gamma and, when om != 0, h = ag / om.
type step struct {
	alpha, om, ag, h float64
}

func newStep(alpha, gamma float64) step {
	st := step{alpha: alpha, om: 1 - alpha, ag: alpha * gamma}
	if st.om != 0 {
		st.h = st.ag / st.om
	}
	return st
}

// kernelRow sets cur = om*cur + ag*nxt + alpha*f, the update toward a
// target that bootstraps from the single row nxt, and returns the sum of
// the new row. A nil f leaves out the feature term (the caller adds sparse
// features); it is allowed only with om = 0, since TD.update handles sparse
// features with om != 0 itself. For om != 0 it computes
// om*(cur + h*nxt) + alpha*f. cur and nxt may be the same slice.
func kernelRow(cur, nxt, f []float64, st step) float64 {
	nxt = nxt[:len(cur)]
	om, ag, h, alpha := st.om, st.ag, st.h, st.alpha
	var s0, s1 float64
	k := 0
	switch {
	case f == nil && om != 0:
		panic("sf: kernelRow: nil features with a step below 1")
	case f == nil:
		for ; k <= len(cur)-4; k += 4 {
			c := cur[k : k+4 : k+4]
			x := nxt[k : k+4 : k+4]
			v0 := om*c[0] + ag*x[0]
			v1 := om*c[1] + ag*x[1]
			v2 := om*c[2] + ag*x[2]
			v3 := om*c[3] + ag*x[3]
			c[0], c[1], c[2], c[3] = v0, v1, v2, v3
			s0 += v0 + v1
			s1 += v2 + v3
		}
		for ; k < len(cur); k++ {
			v := om*cur[k] + ag*nxt[k]
			cur[k] = v
			s0 += v
		}
	case om != 0:
		f = f[:len(cur)]
		for ; k <= len(cur)-4; k += 4 {
			c := cur[k : k+4 : k+4]
			x := nxt[k : k+4 : k+4]
			p := f[k : k+4 : k+4]
			v0 := om*(c[0]+h*x[0]) + alpha*p[0]
			v1 := om*(c[1]+h*x[1]) + alpha*p[1]
			v2 := om*(c[2]+h*x[2]) + alpha*p[2]
			v3 := om*(c[3]+h*x[3]) + alpha*p[3]
			c[0], c[1], c[2], c[3] = v0, v1, v2, v3
			s0 += v0 + v1
			s1 += v2 + v3
		}
		for ; k < len(cur); k++ {
			v := om*(cur[k]+h*nxt[k]) + alpha*f[k]
			cur[k] = v
			s0 += v
		}
	default:
		f = f[:len(cur)]
		for ; k <= len(cur)-4; k += 4 {
			c := cur[k : k+4 : k+4]
			x := nxt[k : k+4 : k+4]
			p := f[k : k+4 : k+4]
			v0 := om*c[0] + ag*x[0] + alpha*p[0]
			v1 := om*c[1] + ag*x[1] + alpha*p[1]
			v2 := om*c[2] + ag*x[2] + alpha*p[2]
			v3 := om*c[3] + ag*x[3] + alpha*p[3]
			c[0], c[1], c[2], c[3] = v0, v1, v2, v3
			s0 += v0 + v1
			s1 += v2 + v3
		}
		for ; k < len(cur); k++ {
			v := om*cur[k] + ag*nxt[k] + alpha*f[k]
			cur[k] = v
			s0 += v
		}
	}
	return s0 + s1
}

// kernelExpected sets cur = om*(cur + h*m) for the mixture
// m = sum_a p[a] base[a*d : (a+1)*d] of the next state's rows (actions with
// p[a] = 0 skipped, the terms added in action order from 0), in one pass,
// and returns the sum of the new row. The new row agrees bit for bit with
// TD.mixture followed by TD.update's one-row pass. om must not be 0. cur
// may be one of the rows of base.
func kernelExpected(cur, base, p []float64, st step) float64 {
	d := len(cur)
	om, h := st.om, st.h
	var s0, s1 float64
	k := 0
	for ; k <= d-4; k += 4 {
		var t0, t1, t2, t3 float64
		for a, q := range p {
			if q == 0 {
				continue
			}
			r := base[a*d+k : a*d+k+4 : a*d+k+4]
			t0 += q * r[0]
			t1 += q * r[1]
			t2 += q * r[2]
			t3 += q * r[3]
		}
		c := cur[k : k+4 : k+4]
		v0 := om * (c[0] + h*t0)
		v1 := om * (c[1] + h*t1)
		v2 := om * (c[2] + h*t2)
		v3 := om * (c[3] + h*t3)
		c[0], c[1], c[2], c[3] = v0, v1, v2, v3
		s0 += v0 + v1
		s1 += v2 + v3
	}
	for ; k < d; k++ {
		var t0 float64
		for a, q := range p {
			if q != 0 {
				t0 += q * base[a*d+k]
			}
		}
		v := om * (cur[k] + h*t0)
		cur[k] = v
		s0 += v
	}
	return s0 + s1
}

// kernelTerminal sets cur = om*cur + alpha*f, the update toward a terminal
// next state, and returns the sum of the new row. A nil f leaves out the
// feature term.
func kernelTerminal(cur, f []float64, st step) float64 {
	om, alpha := st.om, st.alpha
	var s float64
	if f == nil {
		for k, c := range cur {
			v := om * c
			cur[k] = v
			s += v
		}
		return s
	}
	f = f[:len(cur)]
	for k, c := range cur {
		v := om*c + alpha*f[k]
		cur[k] = v
		s += v
	}
	return s
}

// kernelDelta sets the TD error delta = f + gamma*nxt - cur, or
// delta = f - cur when nxt is nil (a terminal next state), and returns the
// sum of delta.
func kernelDelta(delta, f, nxt, cur []float64, gamma float64) float64 {
	f, cur = f[:len(delta)], cur[:len(delta)]
	var s float64
	if nxt == nil {
		for k := range delta {
			delta[k] = f[k] - cur[k]
			s += delta[k]
		}
		return s
	}
	nxt = nxt[:len(delta)]
	for k := range delta {
		delta[k] = f[k] + gamma*nxt[k] - cur[k]
		s += delta[k]
	}
	return s
}

// axpy sets y += a*x.
func axpy(y, x []float64, a float64) {
	x = x[:len(y)]
	k := 0
	for ; k <= len(y)-4; k += 4 {
		yy := y[k : k+4 : k+4]
		xx := x[k : k+4 : k+4]
		yy[0] += a * xx[0]
		yy[1] += a * xx[1]
		yy[2] += a * xx[2]
		yy[3] += a * xx[3]
	}
	for ; k < len(y); k++ {
		y[k] += a * x[k]
	}
}

// dot2 returns (x . y, u . v) in one pass; all four have length len(x).
// Each product is summed with two interleaved partial sums, an order of its
// own (not vec.Dot's), which the linear learner's results are defined with.
func dot2(x, y, u, v []float64) (float64, float64) {
	n := len(x)
	y, u, v = y[:n], u[:n], v[:n]
	var a0, a1, b0, b1 float64
	k := 0
	for ; k <= n-2; k += 2 {
		a0 += x[k] * y[k]
		b0 += u[k] * v[k]
		a1 += x[k+1] * y[k+1]
		b1 += u[k+1] * v[k+1]
	}
	for ; k < n; k++ {
		a0 += x[k] * y[k]
		b0 += u[k] * v[k]
	}
	return a0 + a1, b0 + b1
}
