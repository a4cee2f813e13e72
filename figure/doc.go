// Package figure draws the figures of an experiment as PNG or SVG files
// with gonum/plot: maps of per-state values over a grid layout (the
// successor representation of a policy, where skills go) and curves of the
// normalised return against the labelled budget. Every figure carries a
// caption that says what is drawn, its scale and where the data come
// from; it is drawn under the figure and returned in Figure.Caption.
//
// # Maps over a grid layout
//
// Maps draws any per-state values over the layout of an mdp.Grid, on one
// colour scale for all panels (linear, or log10 from a floor), with a
// colour bar, walls in grey and place cells marked with their layout
// codes, which the caption lists with their names. The colour map is
// viridis (Viridis; van der Walt and Smith 2015), perceptually uniform
// and readable on white: dark violet for the smallest values, light
// yellow for the largest, and place codes written in black or white by
// the cell's lightness.
//
// Successor draws the successor representation of the start cell under
// each of a set of policies,
//
//	occ[s'] = sum_s start[s] M[s][s'],   M = (I - gamma P_pi)^-1,
//
// the expected discounted number of visits to each cell (t = 0 included;
// Occupancy computes it exactly). Skills draws the same quantity under
// the policies of skills (SkillPolicies gives them from a universal SF
// table), for a few skills chosen deterministically to differ most in
// where they go (Spread, greedy farthest-point selection), on a log scale
// by default; the caption names whose skills they are and how they were
// chosen.
//
// # Return curves
//
// Returns draws, from experiment.Results, the normalised return (0 =
// uniform random policy, 1 = optimal) against the labelled budget on a
// log axis: one panel per pretraining method with its variants in colour
// (Okabe-Ito colours), the from-scratch baselines in grey in every panel,
// an optional reference variant (such as a policy that does nothing) as a
// black dashed line, means over seeds with standard-error bars that are
// dodged sideways so they do not overlap. The panels and legend follow
// the results' variants, so new variants need no change here.
//
// # Files
//
// Figure.Save writes PNG (at DPI dots per inch) or SVG by the file
// extension, atomically. SVG files name the Liberation fonts without
// embedding them; a viewer without them substitutes a similar font.
package figure
