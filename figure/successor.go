package figure

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/usf"
)

// Occupancy writes into dst (len m.NumStates(), allocated if nil) the
// expected discounted number of visits to every state under policy pi
// from the start distribution start (nil means m.Start()),
//
//	occ[s'] = sum_s start[s] M[s][s'],   M = (I - gamma P_pi)^-1,
//
// the start-weighted rows of the successor representation of the state
// chain of pi (t = 0 included, so a state is visited at least start[s]
// times; mdp.Finite.ChainOf gives P_pi). It solves the transposed system
// (I - gamma P_pi^T) occ = start with linalg.SolveSuccessor. Round-off
// below zero is set to zero.
//
// Errors wrap ErrDimension (dst or start of the wrong length), mdp's or
// linalg's errors (pi not a distribution, gamma outside [0, 1)).
func Occupancy(dst []float64, m *mdp.Finite, pi mdp.Policy, gamma float64, start []float64) ([]float64, error) {
	n := m.NumStates()
	if start == nil {
		start = m.Start()
	}
	if dst == nil {
		dst = make([]float64, n)
	}
	if len(dst) != n || len(start) != n {
		return nil, fmt.Errorf("figure: occupancy: %d and %d values for %d states: %w", len(dst), len(start), n, ErrDimension)
	}
	p, err := m.ChainOf(pi)
	if err != nil {
		return nil, fmt.Errorf("figure: occupancy: %w", err)
	}
	var tr []linalg.Triplet
	for i := range n {
		ind, val := p.Row(i)
		for k, j := range ind {
			tr = append(tr, linalg.Triplet{Row: j, Col: i, Val: val[k]})
		}
	}
	pt, err := linalg.CSRFromTriplets(n, n, tr)
	if err != nil {
		return nil, fmt.Errorf("figure: occupancy: %w", err)
	}
	var x mat.Dense
	if err := linalg.SolveSuccessor(&x, pt, gamma, mat.NewDense(n, 1, slices.Clone(start))); err != nil {
		return nil, fmt.Errorf("figure: occupancy: %w", err)
	}
	for i := range dst {
		dst[i] = math.Max(x.At(i, 0), 0)
	}
	return dst, nil
}

// Named is a policy with the name a figure gives it.
type Named struct {
	Name   string
	Policy mdp.Policy
}

// SuccessorOptions configures Successor. A nil *SuccessorOptions or the
// zero value means gamma 0.95, the MDP's start distribution, a linear
// scale, up to four panels per row.
type SuccessorOptions struct {
	// Gamma is the discount of the successor representation, in [0, 1);
	// 0 means 0.95.
	Gamma float64
	// Start is the start distribution; nil means the grid MDP's.
	Start []float64
	// Log draws on a log scale from Floor (MapOptions.Floor; 0 means three
	// decades below the largest value).
	Log   bool
	Floor float64
	// Cols is the number of panels per row; 0 means up to four.
	Cols int
	// Caption is added before the figure's own caption.
	Caption string
}

// Successor draws, for each policy, the successor representation of the
// start cell over the layout of g: the expected discounted number of
// visits to every cell, Occupancy(g.MDP, pi, gamma, start), one panel per
// policy on one colour scale, with a colour bar and a caption saying what
// is drawn. Errors are those of Occupancy and Maps.
func Successor(g *mdp.Grid, pols []Named, opt *SuccessorOptions) (*Figure, error) {
	var o SuccessorOptions
	if opt != nil {
		o = *opt
	}
	if o.Gamma == 0 {
		o.Gamma = 0.95
	}
	maps := make([]Map, len(pols))
	for i, p := range pols {
		occ, err := Occupancy(nil, g.MDP, p.Policy, o.Gamma, o.Start)
		if err != nil {
			return nil, fmt.Errorf("figure: successor of %q: %w", p.Name, err)
		}
		maps[i] = Map{Title: p.Name, Values: occ}
	}
	from := startText(g, o.Start)
	caption := strings.TrimSpace(o.Caption + fmt.Sprintf(
		" Successor representation of %s: the expected discounted number of visits to each cell, sum over t >= 0 of gamma^t P(S_t = cell), gamma = %v (row of M = (I - gamma P_pi)^-1), under each panel's policy.",
		from, o.Gamma))
	return Maps(g, maps, &MapOptions{Log: o.Log, Floor: o.Floor, Label: "expected discounted visits", Caption: caption, Cols: o.Cols})
}

// startText says where the occupancy starts from.
func startText(g *mdp.Grid, start []float64) string {
	if start == nil {
		start = g.MDP.Start()
	}
	var at []int
	for s, p := range start {
		if p > 0 {
			at = append(at, s)
		}
	}
	if len(at) == 1 {
		r, c := g.Cell(at[0])
		return fmt.Sprintf("the start cell (row %d, column %d)", r, c)
	}
	return fmt.Sprintf("the start distribution (%d cells)", len(at))
}

// SkillOptions configures Skills. A nil *SkillOptions or the zero value
// means gamma 0.95, eight skills, the MDP's start distribution, a log
// scale three decades deep, four panels per row.
type SkillOptions struct {
	// Gamma is the discount of the occupancy (the skills' own horizon is
	// a natural choice); 0 means 0.95.
	Gamma float64
	// Count is the number of skills drawn; 0 means 8.
	Count int
	// Start is the start distribution; nil means the grid MDP's.
	Start []float64
	// Linear draws on a linear scale instead of the default log scale
	// (a skill's destination, visited every step once reached, would make
	// every other cell dark on a linear scale).
	Linear bool
	// Floor is the lower end of the log scale (MapOptions.Floor).
	Floor float64
	// Cols is the number of panels per row; 0 means 4.
	Cols int
}

// Skills draws where skills go: for Count of the skills, the expected
// discounted number of visits to every cell from the start under the
// skill's policy (Occupancy), one panel per skill on one colour scale.
// skills[k] is the policy of skill k (for example SkillPolicies of an
// agent's universal SFs); who names whose skills they are for the caption,
// such as "vmf agent, run seed 1", and must not be empty.
//
// The skills shown are chosen to differ most in where they go (greedy
// farthest-point selection): first the skill whose occupancy is farthest,
// in L1 distance, from the mean occupancy of all skills, then repeatedly
// the skill farthest from its nearest already chosen one (ties to the
// lowest index). No randomness is involved. The caption says so and names
// who and the chosen skills. Skills returns the figure and the chosen
// indices in panel order.
func Skills(g *mdp.Grid, who string, skills []mdp.Policy, opt *SkillOptions) (*Figure, []int, error) {
	var o SkillOptions
	if opt != nil {
		o = *opt
	}
	if o.Gamma == 0 {
		o.Gamma = 0.95
	}
	if o.Count <= 0 {
		o.Count = 8
	}
	if o.Cols <= 0 {
		o.Cols = 4
	}
	if strings.TrimSpace(who) == "" || len(skills) == 0 {
		return nil, nil, fmt.Errorf("figure: skills: need the skills and whose they are: %w", ErrConfig)
	}
	occ := make([][]float64, len(skills))
	for k, p := range skills {
		var err error
		if occ[k], err = Occupancy(nil, g.MDP, p, o.Gamma, o.Start); err != nil {
			return nil, nil, fmt.Errorf("figure: skills: skill %d: %w", k, err)
		}
	}
	chosen := Spread(occ, o.Count)
	maps := make([]Map, len(chosen))
	names := make([]string, len(chosen))
	for i, k := range chosen {
		maps[i] = Map{Title: fmt.Sprintf("skill %d", k), Values: occ[k]}
		names[i] = fmt.Sprint(k)
	}
	how := fmt.Sprintf("all %d skills", len(skills))
	if len(chosen) < len(skills) {
		how = fmt.Sprintf("%d of the %d skills, chosen to differ most in where they go (greedy farthest-point selection on the occupancies in L1 distance, starting from the skill farthest from the mean of all %d; no randomness)", len(chosen), len(skills), len(skills))
	}
	caption := fmt.Sprintf("Where the skills of the %s go: %s (skills %s). Each panel is the expected discounted number of visits to each cell from %s under the skill's own policy, gamma = %v.",
		who, how, strings.Join(names, ", "), startText(g, o.Start), o.Gamma)
	f, err := Maps(g, maps, &MapOptions{Log: !o.Linear, Floor: o.Floor, Label: "expected discounted visits", Caption: caption, Cols: o.Cols})
	if err != nil {
		return nil, nil, err
	}
	return f, chosen, nil
}

// Spread returns the indices of up to n of the vectors xs chosen to be
// far apart: first the vector farthest in L1 distance from the mean of
// all, then repeatedly the one whose L1 distance to its nearest chosen
// vector is largest (greedy farthest-point selection, Gonzalez 1985); ties
// go to the lowest index. All vectors must have one length.
func Spread(xs [][]float64, n int) []int {
	n = min(n, len(xs))
	if n <= 0 {
		return nil
	}
	dist := func(a, b []float64) float64 {
		var d float64
		for i := range a {
			d += math.Abs(a[i] - b[i])
		}
		return d
	}
	mean := make([]float64, len(xs[0]))
	for _, x := range xs {
		for i, v := range x {
			mean[i] += v / float64(len(xs))
		}
	}
	near := make([]float64, len(xs)) // distance to the nearest chosen
	for k, x := range xs {
		near[k] = dist(x, mean)
	}
	var chosen []int
	taken := make([]bool, len(xs))
	for len(chosen) < n {
		best := -1
		for k := range xs {
			if !taken[k] && (best < 0 || near[k] > near[best]) {
				best = k
			}
		}
		chosen = append(chosen, best)
		taken[best] = true
		for k, x := range xs {
			d := dist(x, xs[best])
			if len(chosen) == 1 || d < near[k] {
				near[k] = d
			}
		}
	}
	return chosen
}

// SkillPolicies returns the policy of every skill of a universal SF table
// (for example transfer.Agent.USF()): skill k takes usf.Tabular.Greedy(k,
// s), greedy in psi(s, a, w_k) . w_k with ties to the lowest action, as a
// deterministic policy over u's states.
func SkillPolicies(u *usf.Tabular) []mdp.Policy {
	n := u.ObsDim()
	out := make([]mdp.Policy, len(u.Z))
	for k := range u.Z {
		d := make(mdp.Deterministic, n)
		for s := range d {
			d[s] = u.Greedy(k, s)
		}
		out[k] = d
	}
	return out
}
