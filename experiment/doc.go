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
// rewarded, lambda), both atomically. Every field of results.json is
// described, with its type, in the JSON Schema (draft 2020-12)
// results.schema.json of this package (ResultsSchema returns it); a test
// checks a real run's file against it, so a new field must be described
// there.
//
// WriteTable prints the variant x job table of the normalised return at
// one budget (mean +- standard error over seeds; "n/a" with one seed).
//
// # Arrays for NumPy
//
// WriteArrays writes arrays as NumPy .npy files (format 1.0/2.0,
// little-endian, C order; written with codeberg.org/sbinet/npyio) into a
// folder with a manifest, manifest.json, our own JSON: format
// "successor-arrays", version 1, the library version, and per array its
// name, file, description, dtype, shape, axis names, optional labels of
// the positions along an axis, and the SHA-256 of the file (see Manifest
// and ArrayInfo). Plain arrays are float64 or int64; a slice of structs
// such as the records (RecordsArray) or the summary (SummaryArray) becomes
// a structured array with one field per struct field, named by its json
// tag, so new fields appear without code changes. In Python:
//
//	import json, numpy as np
//	man = json.load(open("arrays/manifest.json"))
//	rec = np.load("arrays/records.npy")
//	rec[rec["variant"] == "vmf:usf+gpi"]["normalised"].mean()
//
// ReadManifest reads a manifest back and Manifest.Verify checks the files
// against their checksums.
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
// Files of another configuration are refused (ErrCheckpoint). The
// baselines of seed s keep their rows in baselines-seed<s>.run.
//
// # Shards and merging
//
// The runs of an experiment are its units (Units): the pretraining of one
// method on one seed with the adaptation of the agent to every job, and
// the baselines of one seed. Each writes one run record, so a unit is
// also what a cluster shares out. Plan(n) assigns the units to n shards
// by the longest-processing-time rule (Graham 1969) on their expected
// cost, the pretraining steps plus the labelled steps; the plan depends
// only on the experiment, so each shard computes it on its own. RunShard
// runs one shard into the shared CheckpointDir; Merge reads every record
// back and returns the results of a single RunContext, bit for bit (the
// timings aside: each record keeps the seconds of the machine that ran
// it). Missing, unfinished, corrupt or foreign records are errors naming
// every file (MergeError); so are records written by different builds
// (library version, Go version, system and architecture), since Go may
// fuse a multiply and an add on some architectures and the last bits
// could differ. SlurmShard reads the shard of a task of a Slurm job array
// from its environment; examples/cluster ships the batch scripts.
//
// A Sweep is a grid over settings (Axis: a name, values, and how a value
// is set) x seeds. Every setting is an experiment of its own, with its
// records in the subfolder named after its values (dim=16_skills=32);
// the units of all settings are shared out together, so one job array
// balances the whole grid. Sweep.Merge merges each setting, and
// Sweep.WriteFiles writes each setting's results.json and results.csv,
// sweep.csv (every row with the values of its setting) and sweep.json.
//
// # The cost of a sweep, and past one cluster
//
// Pretraining dominates, so the compute of a sweep is close to
//
//	core-seconds = runs x steps per run / steps per second per core,
//
// runs = settings x methods x seeds. On the depot with the demo's settings
// (128 skills, d = 64, 100000 steps), one run, adaptation and exact
// scoring included (PretrainStats.StepsPerSecond), went at 3800 to 6200
// steps per second of wall-clock time for vmf (about 7700 per second of
// CPU time), 2900 for categorical, 5300 for random and 21500 for given,
// measured on a shared 2-core machine under load. A sweep of 1000 vmf
// runs of 100000 steps is then 10^8 steps: 10^8 / 5000 / 3600, about 6
// core-hours (10 for categorical). A job array of 100 one-core tasks of
// 10 runs each finishes in a few minutes once its tasks start; the merge
// reads 1000 records in seconds. Each task needs the memory of one run
// (about 130 MB resident for vmf) per worker. The folder needs a record
// of about 16 kB per run, plus the checkpoints: 88 MB per vmf or random
// run, 71 MB categorical, 10 MB given, so 1000 vmf runs would keep 88 GB
// of checkpoints; DropCheckpoints removes each once its record is
// written (16 MB for the 1000 records), and is what sweeps should use
// unless the agents are wanted afterwards.
//
// Slurm caps a job array at MaxArraySize tasks (1001 by default, from
// memory: see the cluster's slurm.conf), so a 1000-run sweep fits one
// array with a task per run, or fewer tasks of several runs each (shard
// i/n with n below the number of runs; Plan balances them). Past one
// cluster, shards are independent: give shards 0 to k-1 of n to one
// cluster and k to n-1 to another, copy the .run files of both into one
// folder (the checkpoints need not move), and merge there. Merge refuses
// records of different builds, so build the program once, with one Go
// version, for one architecture.
package experiment
