// Package sf implements successor features: feature maps, SF tables, TD
// learners (tabular and linear), the exact closed-form SFs of a policy on a
// finite MDP, and task inference by regression of rewards on features.
package sf
