// Package mdp holds finite Markov decision processes and Markov chains,
// policies, grid layouts parsed from text, the sampling Env interface, and
// the exact oracles (policy evaluation and optimal values) that every
// learned quantity in the library is checked against.
//
// # Finite MDPs
//
// A Finite has n states, A actions in every state, sparse transition
// probabilities P(s' | s, a) stored as one CSR matrix with n*A rows (row
// s*A + a), terminal flags and a start distribution. State-action tables
// (Q, expected rewards, policy tables) are indexed s*A + a throughout. A
// Markov chain is a Finite with one action.
//
// A terminal state stops the episode and bootstrapping: its value is 0,
// and the chains below have zero rows (and zero columns) for it. A time
// limit is different: it ends the episode but not bootstrapping. An Env's
// Step returns an Outcome, the next state and its End: Continuing,
// Terminal or TimeLimit; Outcome.Done says whether the episode is over and
// Outcome.Bootstraps whether a TD target uses the next state's value.
//
// # Exact oracles
//
// For a policy pi and reward r(s, a, s'), with
//
//	rbar(s, a)    = sum_s' P(s'|s,a) r(s,a,s')
//	r_pi(s)       = sum_a pi(a|s) rbar(s,a)
//	P_pi[s][s']   = sum_a pi(a|s) P(s'|s,a)            (zero rows at terminal s)
//
// Evaluate solves the Bellman equation of pi exactly,
//
//	V^pi = (I - gamma P_pi)^-1 r_pi
//	Q^pi(s, a) = rbar(s,a) + gamma sum_s' P(s'|s,a) V^pi(s')   (V = Q = 0 at terminal s)
//
// densely (LU, O(n^3)) for n <= DefaultDenseLimit states and with the
// sparse iterative solver of package linalg (O(nnz) per iteration, to
// relative residual DefaultIterTol) above; a Solver chooses otherwise.
// gamma = 1 is allowed when the chain under pi is absorbing (every state
// reaches a terminal state), as in Sutton & Barto's random walk (Example
// 6.2) and Figure 4.1.
//
// StateActionChain gives the chain over state-action pairs used by the
// closed-form successor features,
//
//	P_pi[(s,a),(s',a')] = P(s'|s,a) pi(a'|s')   (zero when s' is terminal)
//	Psi = (I - gamma P_pi)^-1 PhiBar.
//
// Optimal finds Q*, V* and a greedy optimal policy by policy iteration
// (Howard 1960; Sutton & Barto, 2nd ed., Section 4.3) with exact linear
// solves, and reports the Bellman optimality residual
//
//	max_{s,a} |Q*(s,a) - rbar(s,a) - gamma sum_s' P(s'|s,a) max_a' Q*(s',a')|.
//
// # Policies
//
// Deterministic, Uniform, Table (stochastic), Greedy, EpsilonGreedy and
// Softmax implement Policy; Probs writes pi(. | s) into a caller's slice
// without allocating. Greedy choices break ties toward the lowest action
// index.
//
// # Grid worlds
//
// ParseGrid reads a text layout: '#' wall, '.' free, 'S' start, 'T'
// terminal, and one-character label codes named by the caller. States are
// the free cells in reading order; actions are Up, Right, Down, Left (and
// Stay); walls and the layout edge reflect; an optional slip probability
// replaces a move by a uniformly random one. Depot is the library's demo
// floor (invented data: a dock, a charging pad in a charging lane, a
// packing bench and two shelf bays).
//
// # File format
//
// An MDP file is one JSON object (version 1):
//
//	{
//	  "format": "successor/mdp",        required, exactly this
//	  "version": 1,                     required
//	  "name": "random walk",            optional
//	  "description": "...",             optional, e.g. the source
//	  "states": 7,                      required, n >= 1
//	  "actions": 2,                     required, A >= 1 (1 for a Markov chain)
//	  "terminal": [0, 6],               optional, increasing state indices
//	  "start": [[3, 1]],                required, [state, probability], increasing states
//	  "labels": ["L", "A", ...],        optional, one string per state
//	  "actionNames": ["left", "right"], optional, one string per action
//	  "transitions": [[1, 0, 0, 1], ...],   [state, action, next, probability]
//	  "rewards": [[5, 1, 6, 1], ...],       optional r(s,a,s'): [state, action, next, reward]
//	  "checksum": "crc32:1a2b3c4d"      optional on input, always written
//	}
//
// With "actions": 1, transition and reward entries omit the action:
// [state, next, value]. Indices are 0-based integers. Terminal states need
// no transitions (a self-loop is implied); every action of every other
// state needs probabilities summing to 1 within StochasticTol. Rewards
// are listed only for transitions that exist, from non-terminal states,
// at most once each; missing ones are 0.
//
// The checksum is the CRC-32 (IEEE) of this little-endian encoding, each
// integer as a uint64, each float64 as its IEEE-754 bits, each string as
// its byte length followed by its bytes: the bytes "successor/mdp", the
// version, name, description, n, A; for each state its terminal flag (0 or
// 1) and start probability; for each non-terminal state and action the
// number of successors, then each (next, probability) in increasing next
// order; the number of labels and each label; the number of action names
// and each name; the number of rewards and each (state, action, next,
// value) in increasing (state, action, next) order. Write emits canonical
// files that Load reads back bit for bit. What Load allocates is
// proportional to the size of the file (see Load and ImpliedRowRatio):
// a header cannot declare more states or actions than the file describes.
//
// # Fixtures
//
// Package mdptest holds the textbook cases (Sutton & Barto Examples 3.5,
// 3.8, 4.1 and 6.2) with their published values for testing estimators;
// the same models are in the repository's testdata folder in the file
// format above. RandomFinite, RandomReward and RandomPolicy draw seeded
// random problems for property tests.
//
// # Randomness
//
// Samplers and generators take a *rand.Rand from math/rand/v2 as their
// last argument; the same seed gives the same draws.
package mdp
