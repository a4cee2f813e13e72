package skills

import (
	"fmt"
	"math/rand/v2"

	"github.com/successor-go/successor/internal/nn"
)

// neural is f(x) computed by a multilayer perceptron with the hidden layers
// of a Net and a linear output layer.
type neural struct {
	net *nn.MLP
}

func newNeural(in, out int, net *NetConfig, rng *rand.Rand) (*neural, error) {
	sizes := make([]int, 0, len(net.Hidden)+2)
	sizes = append(sizes, in)
	sizes = append(sizes, net.Hidden...)
	sizes = append(sizes, out)
	act := nn.ReLU
	if net.Tanh {
		act = nn.Tanh
	}
	acts := make([]nn.Activation, len(sizes)-1)
	for i := range acts {
		acts[i] = act
	}
	acts[len(acts)-1] = nn.Identity
	mb := net.MaxBatch
	if mb == 0 {
		mb = 64
	}
	m, err := nn.New(&nn.Config{Sizes: sizes, Acts: acts, MaxBatch: mb}, rng)
	if err != nil {
		return nil, fmt.Errorf("%v: %w", err, ErrConfig)
	}
	return &neural{net: m}, nil
}

func (e *neural) inDim() int                           { return e.net.In() }
func (e *neural) outDim() int                          { return e.net.Out() }
func (e *neural) maxRows() int                         { return e.net.MaxBatch() }
func (e *neural) params() []float64                    { return e.net.Params() }
func (e *neural) grad() []float64                      { return e.net.Grad() }
func (e *neural) forward(x []float64, n int) []float64 { return e.net.Forward(x, n) }
func (e *neural) backward(dy []float64)                { e.net.Backward(nil, dy) }
func (e *neural) clone() encoder                       { return &neural{net: e.net.Clone()} }
