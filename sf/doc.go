// Package sf implements successor features: feature maps, SF tables, TD
// learners (tabular and linear), the exact closed-form SFs of a policy on a
// finite MDP, and task inference by regression of rewards on features.
//
// # Definitions
//
// Transition features phi(s, a, s') in R^d (a FeatureMap) define rewards
// r(s, a, s') = phi(s, a, s') . w for task vectors w. The successor features
// of a policy pi are
//
//	psi^pi(s, a) = E[ sum_{i>=0} gamma^i phi(S_{t+i}, A_{t+i}, S_{t+i+1}) | S_t = s, A_t = a ],
//
// so that Q^pi(s, a) = psi^pi(s, a) . w for every w at once (Barreto et al.
// 2017, Successor Features for Transfer in Reinforcement Learning).
// They satisfy the Bellman equation
//
//	psi(s, a) = E[ phi(s, a, S') + gamma (1 - terminal(S')) psi(S', A') ],  A' ~ pi(.|S'),
//
// whose closed form over the n*A state-action pairs (index s*A + a) is
//
//	Psi = (I - gamma P_pi)^-1 PhiBar,
//	P_pi[(s,a),(s',a')] = P(s'|s,a) pi(a'|s')   (zero when s' is terminal),
//	PhiBar[(s,a)]       = sum_{s'} P(s'|s,a) phi(s,a,s').
//
// Exact computes it (the oracle every learner is tested against): direct
// banded or dense LU up to ExactDenseMax pairs, a Krylov solve per feature
// above. A terminal state has psi = 0.
//
// With the one-hot state features OneHotState, phi(s, a, s') = e_s, psi
// is the successor representation (Dayan 1993) arranged for actions:
// sum_a pi(a|s) psi(s, a) = M[s] with M = (I - gamma P)^-1 for the state
// chain P of pi (transitions into terminal states removed), the t = 0
// visit included. With OneHotStateAction, Psi is the successor
// representation of the state-action chain itself.
//
// # Termination and truncation
//
// A terminal next state bootstraps nothing: pass terminal = true (for a
// step of an mdp.Env, the Outcome's Terminal()). An episode cut by a time
// limit (End mdp.TimeLimit) is not terminal: pass terminal = false, and the
// update bootstraps from the next state as usual.
//
// # Learners
//
// TD is tabular TD(0) for a Table:
//
//	psi(s,a) <- psi(s,a) + alpha (phi(s,a,s') + gamma psi' - psi(s,a)),
//
// with the target psi' of the Sampled (psi(s', a') for the action taken),
// Expected (sum_a' pi(a'|s') psi(s', a')) or Greedy (psi(s', a*), a* greedy
// for a task vector w: SF Q-learning) kind. LinearTD is the semi-gradient
// form for a Linear approximator psi(s, a) = W_a x(s). A StepSchedule is
// constant or decays per pair as StepSize / (1 + n)^Power; Power in (1/2, 1]
// meets the Robbins-Monro conditions under which tabular TD(0) converges
// with probability 1. Updates allocate nothing. A learner that produces a
// non-finite value reports a *DivergenceError naming the update.
//
// The built-in one-hot and label maps are never materialised on the hot
// path: TD adds alpha at their one or two non-zero entries in the same
// pass that moves the row toward gamma psi'. Other maps are called once
// per update through the interface (or their phi can be passed in with
// UpdateFeatures).
//
// # Task inference
//
// InferTask fits w = argmin_w sum_j (r_j - phi_j . w)^2 + lambda ||w||^2
// (linalg.Ridge) and reports the residual; TaskEstimator does the same
// online by recursive least squares (linalg.RLS), exactly matching the
// batch answer after the same samples. Both can project w to the unit
// sphere, for skill vectors.
//
// # Sources for GPI
//
// *Table and *LinearSource give psi(s, .) for all actions, action-major
// (Shape and Psi), the interface the gpi package consumes; Table.State
// hands the same values out in place.
//
// # Files
//
// Table.Save and Linear.Save write the file atomically (a temporary file in
// the same directory, synced, then renamed; mode 0644). The format is the
// library's framing (package internal/fileio), all little-endian:
//
//	offset  size  content
//	0       4     magic: "SFTB" (Table) or "SFLN" (Linear)
//	4       4     format version, uint32 (currently 2)
//	8       8     payload length, uint64: 24 + 8n
//	16      24    three sizes, int64: S, A, D (Table) or A, D, M (Linear)
//	40      8n    the n = S*A*D (or A*D*M) values as IEEE-754 float64 bits,
//	              in the order of Table.Data or Linear.W
//	40+8n   4     CRC-32C (Castagnoli polynomial) of bytes [0, 40+8n)
//
// Values round-trip bit for bit (signed zeros included). A file holds only
// finite values: Save refuses a table with a NaN or an infinity (a
// diverged one) with an error wrapping ErrNonFinite, and LoadTable and
// LoadLinear reject such a file, as they reject one whose magic, version,
// length, sizes or checksum is wrong, with an error wrapping ErrCorrupt,
// never returning a wrong table; sizes are checked against the bytes
// present before anything is allocated, so a file cannot make a loader
// allocate more than its own size.
package sf
