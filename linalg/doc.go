// Package linalg provides the numerical bottom layer of the library: dense
// and sparse solves of (I - gamma P), the fundamental matrix of an absorbing
// chain, stationary distributions, stochastic-matrix checks and least
// squares. It knows nothing of reinforcement learning.
package linalg
