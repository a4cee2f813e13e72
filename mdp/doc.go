// Package mdp holds finite Markov decision processes and Markov chains,
// policies, grid layouts parsed from text, the sampling Env interface, and
// the exact oracles (policy evaluation and optimal values) that every
// learned quantity in the library is checked against.
package mdp
