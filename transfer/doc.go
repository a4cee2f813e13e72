// Package transfer implements the transfer method: reward-free pretraining
// of skills and their universal successor features, fast task inference
// from a few reward-labelled transitions, generalized policy improvement
// (GPI) over the skills nearest the inferred task, exact scoring of one
// policy against the optimum on a finite MDP, and bit-exact checkpoints of
// one run. The harness that runs it over methods, seeds, jobs and budgets,
// with baselines, run records and results files, is package experiment,
// which uses only this package's exported API.
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
// skills.Softmax: phi = (log q(. | s), log K) and w = (z, 1), so that
// phi(s') . w = log q(z | s') - log p(z), Eysenbach et al. 2019), Random
// (fixed random unit vectors, sf.NewRandom; no mutual-information term)
// and Given (features handed in, e.g. place labels: the upper reference).
//
// # What runs
//
// The job is assembled from the library's pieces. The environment is an
// Env such as *mdp.Sampler (termination and truncation kept apart). The
// skill set z_1..z_K (PretrainConfig.Skills, for every method) is drawn
// once from the prior, skills.UniformSphere (for Categorical, the K
// one-hot vectors of skills.Categorical's support); every episode acts
// with one of them, uniformly. Observations are one-hot states, and the
// discriminators are skills.NewVMF and skills.NewSoftmax with the linear
// map f(x) = x W + b, which on a one-hot x is a table plus a shared bias;
// each environment step takes one skills Update (an Adam step, Kingma & Ba
// 2015) on a minibatch of (s', z) drawn from a usf.Replay of the
// reward-free transitions. PretrainConfig.DiscOptim =
// skills.OptimSparseAdam updates only the rows of the minibatch's states and
// the bias: on the demo's depot (5 seeds, d = 64, 128 skills) it raised
// VMF pretraining from about 7.8k to 14.4k steps/s but lowered the mean
// normalised return of vmf:usf+gpi from 0.55 to 0.38 (seeds 1-3: 0.63 with
// dense Adam, 0.35 to 0.44 with sparse Adam at step sizes 0.01 to 0.3), so
// dense Adam stays the default.
//
// The universal SFs are a usf.Tabular over the task vectors
// w_k = TaskVector(z_k), one sf.Table per skill, and the same minibatch
// trains them by usf.Tabular.UpdateRelabel: each replayed transition
// updates the acting skill's table and PretrainConfig.Relabel more skills
// drawn at random (off-policy relabelling: phi(s') . w_k is known for
// every k), always with the current phi (the features stored in the
// replay are not used), by TD(0) with the greedy target of each skill's
// own task, the greedy action read from the Tabular's cache of
// psi(s, a, w_k) . w_k. The policy of a skill (acting, Collect) reads the
// same cache. GPI reads the skills' sf.Tables as gpi sources.
//
// A universal form linear in z, psi(s, a, z) = M_{s,a} z (+ b_{s,a}), was
// tried first; on the depot it could not represent the policies of distant
// skills (it failed even with the given place features), so the tabular
// form is used.
//
// # Task inference and acting
//
// Infer fits
//
//	w = argmin_w sum_j (r_j - phi(s'_j) . w)^2 + lambda ||w||^2
//
// over the n labelled transitions (sf.InferTask), then normalises w to unit
// length for sphere skills, and reports the residual and R^2 of the fit: a
// reward on place labels must be close to linear in the learned phi for
// this to work. The penalty follows AdaptConfig.Ridge: by default
// (RidgeCV) Infer chooses lambda from AdaptConfig.RidgeGrid
// by leave-one-state-out cross-validation on the labelled transitions, in
// closed form (sf.RidgeCV); with 64 learned features a nearly
// unregularised fit extrapolated wildly to places the labelled steps never
// reached, and the agent went there. RidgeFixed uses AdaptConfig.Lambda (0:
// plain least squares).
//
// Adapt then acts by GPI (Barreto et al. 2017) over the universal SFs
// tabulated at the skill set, the successor-feature method proper:
//
//	pi(s) = argmax_a max_{z in C} psi(s, a, z) . w,
//
// with C the AdaptConfig.Candidates skills nearest to w (cosine). With
// AdaptConfig.GPI = GPIOff it acts greedily in psi(s, ., z) . w for the
// single nearest skill z. This is the default (FitNone).
//
// AdaptConfig.Fit = FitModel is an explicitly separate option: model-based
// evaluation of the inferred task on the empirical model of the reward-free
// data. The tables hold psi only at the skills, so FitModel computes
// Q(., ., w) by value iteration, with the skills' discount, on the
// empirical transition model of the counts of every reward-free transition
// the agent took, with the inferred reward phi(s') . w (no environment
// step, no reward label; O(sweeps x distinct transitions)) and adds it to
// the GPI candidates. It is not successor-feature transfer: where it wins,
// it measures the fit of the model of the reward-free data rather than the
// successor features.
//
// The labelled transitions are collected by Collect with a stated rule: the
// agent follows its own skills from the task's start state, moving to the
// next skill of a random permutation every AdaptConfig.SwitchEvery steps
// (ExploreSkills), follows them for a warm-up and then acts on the task
// inferred so far (ExploreGreedy), or takes uniformly random actions
// (ExploreUniform). Their count is the labelled budget.
//
// # Evaluation
//
// Evaluate and Reference evaluate one policy exactly on a finite MDP
// (mdp.Evaluate and mdp.Optimal) with the task's discount. As in mdp and
// gpi, Evaluate returns the exact values (an Evaluation embeds
// mdp.Values); what it adds is the policy's normalised Score:
//
//	normalised = (J(pi) - J(uniform)) / (J(optimal) - J(uniform)),   J(pi) = sum_s mu(s) V^pi(s),
//
// 0 for the uniform random policy and 1 for an optimal one, from the start
// distribution mu. MonteCarlo estimates a discounted return with its
// standard error where there is no oracle.
//
// # Configuration
//
// PretrainConfig, ResumeConfig and AdaptConfig are plain structs whose zero
// value means the documented defaults; the functions take a pointer, and
// nil means the zero value. Resolve fills them in; resolving twice gives the
// same configuration, and "off" is never written as "default": the ridge
// rule (RidgeCV or RidgeFixed) and GPI (GPIOn or GPIOff) are fields of
// their own, and "no relabelling" and "no random actions" are recorded as
// -1. The JSON form (snake_case keys, enumerations as text) is what
// checkpoints and results files record. There are two discounts:
// PretrainConfig.SkillGamma, the horizon of the skills (their SFs and the
// fitted values of FitModel), and the task's, an argument of Evaluate and
// NewReference.
//
// # Runs, seeds and checkpoints
//
// A pretraining run owns its generator, a PCG generator seeded from
// PretrainConfig.Seed, so that its checkpoint can carry the generator's
// state; the run is fully determined by it. Every other call that draws
// (Collect, MonteCarlo) takes a *rand.Rand as its last argument and
// advances it. PretrainContext,
// ResumeContext and Agent.Continue stop at the first episode end after
// their context is done, saving a checkpoint there when a path is set.
//
// Pretraining writes checkpoints atomically (temporary file, fsync, rename)
// at episode ends: the resolved configuration (JSON), the library types'
// own encodings (skills.Marshal of the discriminator, usf.Tabular and
// usf.Replay MarshalBinary, the PCG state), the skill vectors, the
// empirical model's counts and the counters, framed by a magic number, a
// version and a CRC-32 (Castagnoli) checksum. Resume continues
// bit-identically: a run saved at step N and resumed to 2N equals an
// uninterrupted 2N run.
package transfer
