// Package successor is the root of a library for transfer in reinforcement
// learning built on successor features: an agent pretrains with no reward,
// then meets a new task with only a few reward-labelled steps.
//
// The packages, bottom first (imports point only up this list):
//
//	linalg    dense and sparse solves of (I - gamma P), fundamental matrix,
//	          stationary distribution, stochastic checks, least squares
//	mdp       finite MDPs, policies, grid layouts, sampling, exact oracles
//	sf        feature maps, SF tables, TD learners, exact SFs, task inference
//	gpi       generalized policy evaluation and improvement, exact checks
//	usf       universal successor features psi(s, a, z)
//	skills    skill priors, discriminators, intrinsic rewards, MI estimates
//	transfer  reward-free pretraining, task inference, GPI, evaluation
//
// Conventions shared by every package:
//
// The successor representation of a row-stochastic P includes the t = 0 term:
//
//	M = sum_{t>=0} gamma^t P^t = (I - gamma P)^-1
//
// Successor features use transition features phi(s, a, s') and
//
//	psi^pi(s, a) = E[ sum_{i>=0} gamma^i phi(S_{t+i}, A_{t+i}, S_{t+i+1}) | S_t = s, A_t = a ]
//	Q^pi(s, a)   = psi^pi(s, a) . w      when r(s, a, s') = phi(s, a, s') . w
//
// A terminal state stops bootstrapping; a time limit (truncation) does not.
// Randomness is always passed in as a *rand.Rand from math/rand/v2.
//
// Version names the release; cite it with experiment results.
package successor
