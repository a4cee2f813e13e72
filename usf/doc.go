// Package usf implements universal successor features psi(s, a, z): one
// approximator that gives the successor features of the policy of every
// task (or skill) vector z, so that GPI can be taken over any set of z at
// no extra training cost.
//
// # Definitions
//
// Transition features phi(s, a, s') in R^d and a vector z in R^d define the
// reward r_z(s, a, s') = phi(s, a, s') . z. The policy of z is greedy in
// the approximator's own action values for r_z,
//
//	pi_z(s) = argmax_a psi(s, a, z) . z      (ties to the lowest action),
//
// and psi(., ., z) is trained toward the successor features of pi_z by
// semi-gradient TD(0) on transitions (s, a, phi, s', terminal, z):
//
//	y     = phi + gamma (1 - terminal) psi(s', a', z),
//	a'    = pi_z(s')  or a next action given with the transition,
//	delta = y - psi(s, a, z),
//	loss  = (1/(2n)) sum_i ||delta_i||^2   over a batch of n transitions.
//
// At the fixed point, psi(., ., z) . z is the optimal Q of r_z and psi is
// the successor features of an optimal policy of r_z (SF Q-learning,
// Barreto et al. 2017, sections 4-5), which is what every test here checks
// against sf.Exact and mdp.Optimal. A terminal next state bootstraps
// nothing; a time limit does: a Batch carries Terminal only, so pass
// terminal = false for a step that ended at mdp.TimeLimit.
//
// # Observations
//
// An approximator reads an observation vector x(s) in R^m. For an MDP
// with integer states the default observation is one-hot, x(s) = e_s
// (m = number of states); a Batch then may carry the states in S and Next
// and leave X and NextX nil (Tabular reads the index, Neural builds the
// one-hot input from it). Any other observation is given by an Observer
// and written into X and NextX.
//
// # Approximators
//
// Tabular keeps one sf.Table per z of a finite set Z (psi(s, a, z_k) =
// T_k[s, a]); observations must be one-hot. Update is online TD(0) with
// the per-(z, s, a) step schedule of sf.StepSchedule. UpdateRelabel is the
// update of skill pretraining (Hansen et al. 2020, Algorithm 1), and the
// one package transfer runs: every transition updates the z that acted
// and a number of other z of the set drawn at random (off-policy
// relabelling, the reward phi . z_k of every z_k being known), with the
// greedy target of each z's own task; it reads the greedy action from a
// cache of the action values Q(s, a, z_k) = psi(s, a, z_k) . z_k (Values,
// Greedy), which both updates keep current and which is rebuilt exactly
// from the tables after a load, and it reports the squared TD error per
// feature (TDStats). Its arithmetic is sf.TD's, so it equals
// sf.TD.UpdateFeatures bit for bit.
//
// Cost per transition: Tabular O(A d) (the greedy next action) plus the
// look-up of z in the set, O(d) expected by a hash table whatever K is, or
// none when the Batch gives the set index K; UpdateRelabel O(A + d) per
// updated z (the greedy action from the cache, the row, and the refreshed
// cache entry); Neural one forward pass of
// the target network and one forward and backward pass of the online
// network per minibatch (about 2 n sum_l in_l out_l flops each).
//
// Neural is not used by package transfer: the tabular form is exact on
// the finite skill set that transfer pretrains, and Neural is the
// approximator for psi over a continuous z (with Candidates for GPI around
// an inferred task). Its tests check it against the exact oracles on its
// own.
//
// Neural is a multilayer perceptron (package internal/nn) on the
// concatenation (x, z) with A*d outputs, output a*d + k being psi_k(s, a, z).
// It trains on minibatches (typically from a Replay) with Adam and
// gradient-norm clipping; the TD target uses a target network, copied from
// the online network every TargetEvery updates (the default) or, if Tau > 0,
// moved toward it by Polyak averaging after every update. The target's
// psi(s', ., z) comes from the target network, and so does the greedy
// a' = pi_z(s') unless OnlineSelect picks it with the online network (the
// double estimator of van Hasselt et al. 2016).
//
// # GPI
//
// Source fixes z and an Observer and is a GPI source (package gpi):
// Psi(dst, s) writes psi(s, ., z) action-major. Candidates builds a GPI
// candidate set around an inferred task vector w: w itself plus vectors
// drawn from the von Mises-Fisher distribution on the unit sphere with mean
// direction w/||w|| (skills.VonMisesFisher, Wood 1994), or by normalising
// w/||w|| + sigma N(0, I).
//
// # Replay
//
// Replay is a ring of transitions with uniform minibatch sampling. It
// keeps phi and z of every transition (33 + 16 obs + 16 d bytes each), or,
// with dimension 0, only the index of z in a set the caller holds (41 +
// 16 obs bytes), the caller recomputing phi and z after sampling; a
// Tabular then reads the indices from Batch.K. Entry reads the stored
// transitions oldest first, and Validate checks them against the sizes of
// a problem (for instance after loading a checkpoint).
//
// # Saving
//
// Tabular, Neural and Replay implement encoding.BinaryMarshaler and
// encoding.BinaryUnmarshaler. Each encoding is a record of the library's
// framing (package internal/fileio): a four-byte magic, a format version,
// the payload length, the payload (documented in each MarshalBinary) and a
// CRC-32C of the rest. Loading checks all of it, refuses sizes that the
// bytes present cannot hold before allocating, and returns an error
// wrapping ErrCorrupt (a Replay's capacity, allocated in full, is bounded
// at 2^28 words). A caller can embed several of them, length-prefixed, in
// one checkpoint file (write it to a temporary file in the same directory,
// fsync, rename). A *rand.Rand built on rand.PCG is saved by marshalling
// the PCG. Train N updates, save, load and train N more gives the same
// bits as 2N updates uninterrupted.
package usf
