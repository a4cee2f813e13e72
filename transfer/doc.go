// Package transfer runs the whole transfer job: reward-free pretraining of
// skills and their universal successor features, fast task inference from a
// few reward-labelled transitions, generalized policy improvement (GPI) over
// a candidate set, and exact scoring of the resulting policy against the
// optimum on a finite MDP, with from-scratch baselines and ablations, seeded
// parallel runs, results files and bit-exact checkpoints.
//
// # Method
//
// The method is variational intrinsic successor features (Hansen et al.
// 2020, "Fast Task Inference with Variational Intrinsic Successor
// Features", Algorithm 1). Pretrain draws a skill z at the start of every
// episode and acts epsilon-greedily on
//
//	Q(s, a, z) = psi(s, a, z) . z.
//
// A discriminator learns features phi(s) such that log q(z | s) is linear in
// z; with the von Mises-Fisher discriminator
//
//	phi(s) = f(s) / ||f(s)||,   log q(z | s) = kappa phi(s) . z + log C_d(kappa),
//
// trained to maximise log q(z | s') on replayed (s', z), and the universal
// SFs learn the intrinsic reward phi(s') . z, so the task vector equals the
// skill vector (w = z):
//
//	psi(s, a, z) <- psi(s, a, z) + alpha [phi(s') + gamma (1 - terminal) psi(s', a*, z) - psi(s, a, z)],
//	a* = argmax_a psi(s', a, z) . z.
//
// Method selects the feature source: VMF (above), Categorical (one-hot z,
// phi = log softmax of the logits, Eysenbach et al. 2019), Random (fixed
// random unit vectors, no mutual-information term) and Given (features
// handed in, e.g. place labels: the upper reference).
//
// # Representation
//
// Observations are one-hot states, so the discriminator is a table f(s) and
// the universal SFs are tabulated over a finite skill set z_1..z_K drawn
// once uniformly on the unit sphere (for Categorical, the K one-hot vectors):
// one table psi(s, a, z_k) per skill. Every replayed transition updates the
// acting skill's table and Relabel more skills drawn at random (off-policy
// relabelling: phi(s') . z_k is known for every k). We first tried the
// linear approximator psi(s, a, z) = M_{s,a} z (+ b_{s,a}) over the joint
// feature x(s) outer z; on the depot it could not represent the policies of
// distant skills (it failed even with the given place features), so the
// tabular form is used.
//
// # Task inference and acting
//
// InferTask fits
//
//	w = argmin_w sum_j (r_j - phi(s'_j) . w)^2 + lambda ||w||^2
//
// over the K labelled transitions (Cholesky solve of the d x d normal
// equations, O(K d^2 + d^3)), then normalises w to unit length for sphere
// skills, and reports the residual and R^2 of the fit: a reward on place
// labels must be close to linear in the learned phi for this to work. By
// default (InferTaskCV) lambda is chosen from RidgeGrid by leave-one-state-out
// cross-validation on the labelled transitions, in closed form; with 64
// learned features a nearly unregularised fit extrapolated wildly to places
// the labelled steps never reached, and the agent went there.
// Adapt then acts by GPI (Barreto et al. 2017) over the universal SFs
// tabulated at the skill set, the successor-feature method proper:
//
//	pi(s) = argmax_a max_{z in C} psi(s, a, z) . w,
//
// with C the AdaptConfig.Candidates skills nearest to w (cosine). GPI off
// (a negative Candidates) acts greedily in psi(s, ., z) . w for the single
// nearest skill z. This is the default (FitNone).
//
// AdaptConfig.Fit = FitModel is an explicitly separate option: model-based
// evaluation of the inferred task on the empirical model of the reward-free
// data. The tables hold psi only at the skills, so FitModel computes
// Q(., ., w) by value iteration on the empirical transition model of the
// agent's reward-free replay buffer with the inferred reward phi(s') . w
// (no environment step, no reward label; O(sweeps x stored pairs x A)) and
// adds it to the GPI candidates. It is not successor-feature transfer:
// where it wins, it measures the fit of the model of the reward-free data
// rather than the successor features, and Experiment reports it as its own
// variant (SuffixModelFit) beside the pure one (SuffixGPI) and the
// no-GPI ablation (SuffixNoGPI).
//
// The labelled transitions are collected by Collect with a stated rule: the
// agent follows its own skills from the task's start state, moving to the
// next skill of a random permutation every AdaptConfig.SwitchEvery steps
// (ExploreSkills), follows them for a warm-up and then acts on the task
// inferred so far (ExploreGreedy), or takes uniformly random actions
// (ExploreUniform). Their
// count is the labelled budget; baselines get the same budget.
//
// # Evaluation
//
// Evaluate and Reference score a policy exactly on a finite MDP
// (mdp.Evaluate and mdp.Optimal):
//
//	normalised = (J(pi) - J(uniform)) / (J(optimal) - J(uniform)),   J(pi) = sum_s mu(s) V^pi(s),
//
// 0 for the uniform random policy and 1 for an optimal one, from the start
// distribution mu. MonteCarlo estimates a discounted return with its
// standard error where there is no oracle.
//
// # Runs, seeds and files
//
// An Experiment runs methods x seeds x jobs x budgets on Workers goroutines.
// Every random draw comes from a PCG generator derived from the run's seed
// (DeriveSeed, SplitMix64), so the figures do not depend on the number of
// workers. Report writes results.json (library and Go versions, seeds, the
// full configuration, every figure) and results.csv, atomically.
//
// Pretraining writes checkpoints atomically (temporary file, fsync, rename)
// at episode ends: configuration, discriminator, skills, SF tables, replay
// buffer, PCG state and counters, framed by a magic number, a version and a
// CRC-32 (Castagnoli) checksum. Resume continues bit-identically: a run
// saved at step N and resumed to 2N equals an uninterrupted 2N run.
package transfer
