// Package gpi implements generalized policy evaluation and improvement (GPE
// and GPI) over any set of successor-feature sources, the exact value of the
// GPI policy on a finite MDP, exact checks of the GPI theorems of Barreto et
// al. (2017, "Successor Features for Transfer in Reinforcement Learning",
// NeurIPS), and SF Q-learning over a sequence of tasks.
//
// # GPE and GPI
//
// A Source gives successor features psi_i(s, a) in R^d for every action of
// a state (an *sf.Table, a linear approximator, a universal SF at a fixed
// task vector). Given sources psi_1, ..., psi_k and a task vector w, GPE
// computes
//
//	Q_i(s, a) = psi_i(s, a) . w
//
// for every source and action (Selector.Values), and GPI acts by
//
//	pi(s) = argmax_a max_i Q_i(s, a)
//
// (Act, Selector.Act). Ties go to the lowest source index, then to the
// lowest action. A Selector keeps scratch space, so that choosing an action
// allocates nothing; *sf.Table and any Viewer are read in place, other
// sources are copied into the scratch with their Psi method. The cost of a
// choice is k*A dot products of length d (one matrix-vector product per
// source, assembly on amd64 through gonum for A*d >= 64). For a fixed
// library of policies, a Stack stores the sources state-major so that
// Selector.ActStack makes the same choice with a single matrix-vector
// product over k*A rows.
//
// # Exact evaluation and the theorems
//
// On a finite MDP with reward r(s, a, s') = phi(s, a, s') . w, Evaluate
// builds the deterministic GPI policy and evaluates it exactly with
// mdp.EvaluateExpected, together with each source's own policy, so a user
// can see where GPI improves on which policy. Theorem 1 of Barreto et al.
// (2017) says that if |Q^{pi_i} - Q~_i| <= eps everywhere and pi is greedy
// in max_i Q~_i, then
//
//	Q^pi(s, a) >= max_i Q^{pi_i}(s, a) - 2 eps / (1 - gamma)
//
// at every (s, a) (DominanceSlack, CheckDominance). Theorem 2 says that if
// the sources are within eps of the values on task w_i of policies optimal
// for tasks w_j, then
//
//	Q*_i(s, a) - Q^pi_i(s, a) <= 2/(1 - gamma) (phi_max min_j ||w_i - w_j|| + eps),
//
// with phi_max = max ||phi(s, a, s')|| (GapBound, PhiMax, CheckGap). The
// checks return typed errors naming the worst state-action pair.
//
// # Transfer over a task sequence
//
// SFQLearning runs SF Q-learning in the style of section 5 of Barreto et al.
// (2017): a new task every K transitions, one SF table per task seen, the
// current table learned with sf's TD learner with the greedy target, actions
// by GPI over all tables with epsilon-greedy exploration. QLearning is the
// plain Q-learning baseline over the same sequence. Both are evaluated
// exactly as they learn, by the normalised return
//
//	(J(pi) - J(uniform)) / (J(pi*) - J(uniform)),   J(pi) = sum_s start(s) V^pi(s),
//
// 0 for the uniform random policy and 1 for an optimal one (mdp.Optimal).
// The depot of mdp.Depot with place-label features (sf.GridLabels) is the
// demo; it is invented data. Policies learned in such a simulation must not
// drive a physical machine without a proper safety review.
package gpi
