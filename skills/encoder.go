package skills

import (
	"math"
	"math/rand/v2"
	"slices"
)

// encoder is the map f: R^in -> R^out inside a discriminator: the vMF
// direction f(x) or the categorical logits. The discriminators feed it
// minibatches in chunks of at most maxRows rows.
type encoder interface {
	inDim() int
	outDim() int
	maxRows() int
	// forward returns f of the n rows of x (n rows of outDim, valid until
	// the next forward) and keeps what backward needs.
	forward(x []float64, n int) []float64
	// backward writes dLoss/dParams into grad (overwriting it) given
	// dy = dLoss/df for the rows of the last forward.
	backward(dy []float64)
	params() []float64
	grad() []float64
	clone() encoder
}

// linear is f(x) = x W + b with W in R^{in x out} stored row-major (row j
// holds the weights of input j) followed by b in one flat parameter slice.
// Zero inputs are skipped, so a one-hot x costs one row of W: the tabular
// case.
type linear struct {
	in, out int
	p, g    []float64
	y       []float64 // output buffer, grown on demand
	x       []float64 // input of the last forward (the caller's slice)
	n       int
	// rows lists, ascending, the inputs j that are non-zero in some row of
	// the last backward's minibatch; only those rows of the W part of g,
	// and the bias part, can be non-zero. mark[j] is true for j in rows.
	rows []int
	mark []bool
}

// newLinear returns a linear encoder with W uniform on [-a, a],
// a = sqrt(6/(in+out)) (Glorot & Bengio 2010, eq. 16) and b = 0.
func newLinear(in, out int, rng *rand.Rand) *linear {
	e := &linear{in: in, out: out, p: make([]float64, in*out+out), g: make([]float64, in*out+out)}
	a := math.Sqrt(6 / float64(in+out))
	w := e.p[:in*out]
	for i := range w {
		w[i] = (2*rng.Float64() - 1) * a
	}
	return e
}

func (e *linear) inDim() int        { return e.in }
func (e *linear) outDim() int       { return e.out }
func (e *linear) maxRows() int      { return math.MaxInt32 }
func (e *linear) params() []float64 { return e.p }
func (e *linear) grad() []float64   { return e.g }

func (e *linear) forward(x []float64, n int) []float64 {
	in, out := e.in, e.out
	if cap(e.y) < n*out {
		e.y = make([]float64, n*out)
	}
	y := e.y[:n*out]
	w, b := e.p[:in*out], e.p[in*out:]
	x = x[:n*in]
	for i := 0; i < n; i++ {
		yi := y[i*out : (i+1)*out]
		copy(yi, b)
		for j, v := range x[i*in : (i+1)*in] {
			if v == 0 {
				continue
			}
			wj := w[j*out : (j+1)*out]
			for k := range yi {
				yi[k] += v * wj[k]
			}
		}
	}
	e.x, e.n = x, n
	return y
}

// backward writes the gradient into g. Only the rows of W touched by the
// previous backward (and the bias) can hold non-zero values, so only those
// are cleared: with one-hot inputs the cost is O((n + r) out) for r touched
// rows, not O(in out).
func (e *linear) backward(dy []float64) {
	in, out, n := e.in, e.out, e.n
	gw, gb := e.g[:in*out], e.g[in*out:]
	if e.mark == nil {
		e.mark = make([]bool, in)
		e.rows = make([]int, 0, in)
	}
	for _, j := range e.rows {
		clear(gw[j*out : (j+1)*out])
		e.mark[j] = false
	}
	e.rows = e.rows[:0]
	clear(gb)
	dy = dy[:n*out]
	for i := 0; i < n; i++ {
		di := dy[i*out : (i+1)*out]
		for k, v := range di {
			gb[k] += v
		}
		for j, v := range e.x[i*in : (i+1)*in] {
			if v == 0 {
				continue
			}
			if !e.mark[j] {
				e.mark[j] = true
				e.rows = append(e.rows, j)
			}
			gj := gw[j*out : (j+1)*out]
			for k, d := range di {
				gj[k] += v * d
			}
		}
	}
	slices.Sort(e.rows)
}

func (e *linear) clone() encoder {
	return &linear{in: e.in, out: e.out, p: append([]float64(nil), e.p...), g: make([]float64, len(e.g))}
}
