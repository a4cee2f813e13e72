// Package vec holds small dense vector kernels shared by the packages of
// this library, written once so that every package that uses them sums in
// the same order and gets the same bits.
//
// Dot computes the inner product
//
//	x . y = sum_i x[i] y[i]
//
// with four interleaved partial sums s_k = sum over i = k mod 4 of the
// leading multiple-of-four entries (the tail goes to s_0), combined as
// (s_0 + s_1) + (s_2 + s_3). The order is fixed: results are reproducible
// bit for bit, and differ from a left-to-right sum only by rounding. Code
// whose results were defined with another order (a left-to-right sum, say)
// uses DotSeq, the plain left-to-right sum, since changing the order
// changes the bits.
//
// Argmax returns the index of the largest entry, the lowest among ties;
// ArgmaxRandom and ArgmaxReservoir break ties uniformly at random (one draw
// on a final tie, or one draw per tie met on the way). SampleSphere draws a point
// uniformly from the unit sphere.
package vec
