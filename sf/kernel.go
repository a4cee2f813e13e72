package sf

// The inner loops of the TD updates. Each is unrolled by four over resliced
// views (so the compiler drops the bounds checks), reads and writes every
// entry of the updated row once, and returns the sum of the new row, which
// is finite exactly when the row is (up to overflow of the sum itself), for
// divergence detection at the cost of one addition per entry.

// kernelHot sets cur = om*cur + ag*nxt and returns its sum. cur and nxt may
// be the same slice. For om != 0 it computes om*(cur + (ag/om)*nxt), the
// form of TD.Update's fast path, so the two agree bit for bit.
func kernelHot(cur, nxt []float64, om, ag float64) float64 {
	nxt = nxt[:len(cur)]
	if om != 0 {
		h := ag / om
		var s0, s1 float64
		k := 0
		for ; k <= len(cur)-4; k += 4 {
			c := cur[k : k+4 : k+4]
			x := nxt[k : k+4 : k+4]
			v0 := om * (c[0] + h*x[0])
			v1 := om * (c[1] + h*x[1])
			v2 := om * (c[2] + h*x[2])
			v3 := om * (c[3] + h*x[3])
			c[0], c[1], c[2], c[3] = v0, v1, v2, v3
			s0 += v0 + v1
			s1 += v2 + v3
		}
		for ; k < len(cur); k++ {
			v := om * (cur[k] + h*nxt[k])
			cur[k] = v
			s0 += v
		}
		return s0 + s1
	}
	var s0, s1 float64
	k := 0
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
	return s0 + s1
}

// kernelScale sets cur = om*cur and returns its sum.
func kernelScale(cur []float64, om float64) float64 {
	var s float64
	for k, c := range cur {
		v := om * c
		cur[k] = v
		s += v
	}
	return s
}

// kernelDense sets cur = om*cur + ag*nxt + alpha*f and returns its sum. cur
// and nxt may be the same slice. For om != 0 it computes
// om*(cur + (ag/om)*nxt) + alpha*f, agreeing bit for bit with kernelHot
// followed by adding alpha at the hot entries when f is one-hot.
func kernelDense(cur, nxt, f []float64, om, ag, alpha float64) float64 {
	nxt = nxt[:len(cur)]
	f = f[:len(cur)]
	if om != 0 {
		h := ag / om
		var s0, s1 float64
		k := 0
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
		return s0 + s1
	}
	var s0, s1 float64
	k := 0
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
	return s0 + s1
}

// kernelTerminal sets cur = om*cur + alpha*f and returns its sum.
func kernelTerminal(cur, f []float64, om, alpha float64) float64 {
	f = f[:len(cur)]
	var s float64
	for k, c := range cur {
		v := om*c + alpha*f[k]
		cur[k] = v
		s += v
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

// kernelExpectedHot sets cur = om*(cur + h*t), h = ag/om, for the mixture
// t = sum_a p[a] base[a*d : (a+1)*d] of the next state's rows (actions with
// p[a] = 0 skipped), in one pass, and returns the sum of the new row. It
// agrees bit for bit with TD.mixture followed by kernelHot. om must not be
// 0. cur may be one of the rows of base.
func kernelExpectedHot(cur, base, p []float64, om, ag float64) float64 {
	d := len(cur)
	h := ag / om
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

// dot2 returns (x . y, u . v) in one pass; all four have length len(x).
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
