// Package nn is a small dense neural network for this library: a multilayer
// perceptron in float64 with forward and backward passes on row-major
// minibatches, the Adam optimiser, gradient-norm clipping, target-network
// copies and Polyak averaging, and exact binary save and load. It is sized
// for inputs up to a few hundred, hidden layers up to 256 units and batches
// up to 256 rows, and it allocates nothing after construction.
//
// # API summary
//
//	cfg := nn.Config{Sizes: []int{in, 128, 128, out}, MaxBatch: 64}
//	                               // zero Acts: ReLU hidden, Identity output
//	net, err := nn.New(&cfg, rng)  // seeded init, rng is a *rand.Rand
//	y := net.Forward(x, n)         // x: n rows of In, y: view of n rows of Out
//	loss := nn.MSE(dy, y, t, mask, n)  // or nn.SoftmaxCrossEntropy(dy, y, labels, n, out)
//	net.Backward(dx, dy)           // writes net.Grad() (overwrites); dx may be nil
//	nn.ClipNorm(net.Grad(), 10)    // global L2 norm clipping, returns the norm
//	opt := nn.NewAdam(net.NumParams(), &nn.AdamConfig{StepSize: 1e-3})
//	opt.Step(net.Params(), net.Grad())
//	target := net.Clone()          // target network
//	target.CopyFrom(net)           // hard refresh, or
//	target.Blend(net, 0.005)       // Polyak: target = (1-tau) target + tau net
//	b, _ := net.MarshalBinary()    // exact bytes; UnmarshalBinary checks magic,
//	b, _ = opt.MarshalBinary()     // version, sizes and a CRC-32C checksum
//
// Forward keeps the activations of the batch it was given, and Backward
// uses them, so call Backward after the Forward it belongs to, with no
// other Forward on the same network in between. An MLP is not safe for
// concurrent use.
//
// # Definitions
//
// Layer l (l = 1..L) maps the n x In_l activations H_{l-1} (H_0 = X) to
//
//	H_l = f_l(H_{l-1} W_l + 1 b_l^T)
//
// with W_l stored In_l x Out_l row-major and f_l one of Identity, ReLU
// (max(0, u), derivative taken as 0 at u = 0) and Tanh. Backward, given
// dY = dLoss/dH_L, computes for l = L..1
//
//	D_l      = dH_l (.) f_l'(H_l)       (elementwise; f' is written in H_l)
//	dW_l     = H_{l-1}^T D_l
//	db_l     = 1^T D_l
//	dH_{l-1} = D_l W_l^T
//
// Parameters are one flat slice, layer by layer, W_l then b_l. Params and
// Grad return views of it, so an optimiser works on the whole network in
// one loop.
//
// Initialisation: weights uniform on [-a, a] with a = sqrt(6/In) for a ReLU
// layer (He et al. 2015, "Delving deep into rectifiers", uniform variant)
// and a = sqrt(6/(In+Out)) otherwise (Glorot & Bengio 2010, eq. 16);
// biases zero. The same *rand.Rand state gives the same bits.
//
// Adam follows Kingma & Ba 2015, "Adam: a method for stochastic
// optimization", Algorithm 1, literally:
//
//	t   <- t + 1
//	m   <- beta1 m + (1 - beta1) g
//	v   <- beta2 v + (1 - beta2) g^2
//	mh  =  m / (1 - beta1^t)
//	vh  =  v / (1 - beta2^t)
//	theta <- theta - alpha mh / (sqrt(vh) + eps)
//
// ClipNorm scales a gradient g by c/||g||_2 when ||g||_2 > c (global norm
// clipping, Pascanu et al. 2013, Algorithm 1).
//
// Matrix products go through gonum's BLAS (blas64), split into blocks
// small enough that gonum's single-threaded kernel runs (so no goroutines
// and no allocations); BenchmarkGemm compares it with a plain loop.
//
// # Binary formats
//
// Both records use the library's framing (package internal/fileio: a
// four-byte magic, a uint32 format version, the payload length, the
// payload, a CRC-32C), format version 2, integers as int64 and floats as
// their IEEE-754 bits, little-endian. The MLP payload (magic "NNML"):
// MaxBatch, the layer count L, the L+1 sizes, the L activations as one
// byte each, and the parameters (their count follows from the sizes).
// The Adam payload (magic "NNAD"): the parameter count P, alpha, beta1,
// beta2, eps, the step t, then P first and P second moments. Loading
// checks all of it, bounds every size (MaxLayers, MaxWidth, MaxRows, at
// most 2^26 parameters, no more than the bytes present) before allocating,
// and wraps ErrCorrupt on any mismatch.
package nn
