// Package experiment is the harness around the transfer method: it
// pretrains methods x seeds, hands every pretrained agent every job with
// every labelled budget, scores the policies exactly, runs from-scratch
// baselines with the same budgets, keeps run records so that an
// interrupted experiment continues where it stopped, and writes the
// results files. It uses only the exported API of package transfer; a
// researcher can write another harness with the same calls.
//
// # An experiment
//
// An Experiment lists the jobs (weight vectors over place features, the
// reward r(s, a, s') = Places(s') . w), the pretrained methods (one
// transfer.PretrainConfig each), the seeds and the labelled budgets.
// RunContext runs, for every seed s and method m, transfer.PretrainContext
// with the seed DeriveSeed(s, m) on the exploration MDP; then, for every
// job j, transfer.Collect gathers the largest budget of labelled
// transitions (seed DeriveSeed(s, 1000+j)), and for every budget b the first
// b of them give transfer.Infer's task and three policies, the variants:
//
//	<m>:usf+gpi        GPI over the universal SFs of the skills nearest w
//	                   (the successor-feature method proper);
//	<m>:usf-no-gpi     the single nearest skill (GPI off);
//	<m>:model-fit+gpi  GPI with the model-based candidate transfer.FitModel.
//
// Each policy is scored by transfer.Reference against the uniform random
// and the optimal policy of the task MDP with the task discount
// (Experiment.TaskGamma):
//
//	normalised = (J(pi) - J(uniform)) / (J(optimal) - J(uniform)).
//
// With Baselines, every seed and job also runs tabular Q-learning (Watkins
// 1989) and SF Q-learning with the place features (Barreto et al. 2017,
// section 5) from scratch on the labelled budget (QBaseline, SFQBaseline;
// seeds DeriveSeed(s, 2000+j) and DeriveSeed(s, 3000+j)), with the task
// discount. They are not gpi.QLearning and gpi.SFQLearning, which learn a
// sequence of tasks and record exact learning curves.
//
// Work is split into units (one method on one seed, or the baselines of one
// seed) run by Experiment.Workers goroutines. Every random draw comes from
// a PCG generator derived from the unit's seed (DeriveSeed, SplitMix64),
// so the figures do not depend on the number of workers.
//
// # Configuration and results files
//
// Experiment.Resolve fills in every default (the methods', the
// adaptation's, the baselines' and the task discount). NewReport records
// the resolved experiment with the library and Go versions and every
// figure; Report.WriteJSON writes results.json (snake_case keys,
// enumerations as text, the resolved values rather than zeros) and
// Report.WriteCSV writes results.csv (one line per scored policy:
// variant, job, budget, seed, normalised, value, r_squared, residual,
// rewarded, lambda), both atomically.
//
// # Checkpoints
//
// An Experiment with a CheckpointDir keeps, per pretraining run (method m,
// seed s), the agent's checkpoint <m>-seed<s>.ckpt (transfer's format) and
// a run record <m>-seed<s>.run: a JSON envelope (format name, version,
// CRC-32C of the body) around a fingerprint of the settings, the final MI
// estimate and the result rows. Stopped at any point (killed, or
// RunContext's context cancelled), it restarts where it stopped: finished
// runs keep their rows, pretrained ones go straight to adaptation, the
// others resume from their last checkpoint (transfer.Agent.Continue), and
// the figures equal those of an uninterrupted experiment bit for bit.
// Files of another configuration are refused (ErrCheckpoint).
package experiment
