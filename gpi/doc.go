// Package gpi implements generalized policy evaluation and improvement (GPE
// and GPI) over any set of successor-feature sources, the exact value of the
// GPI policy on a finite MDP, and exact checks of the GPI theorems.
//
// Given sources psi_1, ..., psi_k and a task vector w, GPE computes
//
//	Q_i(s, a) = psi_i(s, a) . w
//
// and GPI acts by
//
//	pi(s) = argmax_a max_i Q_i(s, a).
//
// Ties go to the lowest source index, then the lowest action.
package gpi
