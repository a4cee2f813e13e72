package main

import (
	"fmt"
	"path/filepath"
	"slices"
	"strconv"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/experiment"
	"github.com/successor-go/successor/figure"
	"github.com/successor-go/successor/linalg"
	"github.com/successor-go/successor/mdp"
	"github.com/successor-go/successor/sf"
	"github.com/successor-go/successor/transfer"
)

// arraysDir is the folder of the NumPy arrays inside the output folder.
const arraysDir = "arrays"

// outputs are the policies and skills behind the figures and arrays.
type outputs struct {
	g     *mdp.Grid
	e     *experiment.Experiment // resolved
	res   *experiment.Results
	kept  map[transfer.Method]*transfer.Agent
	seed  uint64
	named []figure.Named // uniform, optimal for the first job, an adapted agent
	// skills per kept method: the figure and the chosen skills.
	skills map[transfer.Method]*figure.Figure
	chosen map[transfer.Method][]int
}

// prepare computes the policies of the successor figure (uniform random,
// optimal for the first job, the first kept agent adapted to the first job
// exactly as the experiment adapted it for variant <m>:usf+gpi at the
// largest budget) and the skill figures of every kept agent.
func prepare(g *mdp.Grid, e *experiment.Experiment, res *experiment.Results, kept map[transfer.Method]*transfer.Agent) (*outputs, error) {
	o := &outputs{g: g, e: e, res: res, kept: kept, seed: e.Seeds[0],
		skills: map[transfer.Method]*figure.Figure{}, chosen: map[transfer.Method][]int{}}
	job := e.Jobs[0]
	reward, err := g.PlaceReward(job.Weights)
	if err != nil {
		return nil, err
	}
	opt, err := mdp.Optimal(g.MDP, reward, e.TaskGamma)
	if err != nil {
		return nil, err
	}
	o.named = []figure.Named{
		{Name: "uniform random policy", Policy: mdp.Uniform{N: g.MDP.NumActions()}},
		{Name: fmt.Sprintf("optimal policy for %q", job.Name), Policy: opt.Policy},
	}
	for _, mc := range e.Methods {
		ag := kept[mc.Method]
		if ag == nil {
			continue
		}
		budget := e.Budgets[len(e.Budgets)-1]
		env := mdp.NewSampler(e.Task, e.Adapt.EpisodeSteps)
		lab, err := transfer.Collect(env, ag, reward, budget, &e.Adapt, experiment.CollectRand(o.seed, 0))
		if err != nil {
			return nil, err
		}
		pol, err := transfer.Adapt(ag, lab, &e.Adapt)
		if err != nil {
			return nil, err
		}
		o.named = append(o.named, figure.Named{Name: fmt.Sprintf("%s agent adapted to %q (%d steps)", ag.Method(), job.Name, budget), Policy: pol})
		break
	}
	for _, mc := range e.Methods {
		ag := kept[mc.Method]
		if ag == nil {
			continue
		}
		f, chosen, err := figure.Skills(g, fmt.Sprintf("%s agent of run seed %d", ag.Method(), o.seed), figure.SkillPolicies(ag.USF()),
			&figure.SkillOptions{Gamma: ag.Config().SkillGamma})
		if err != nil {
			return nil, err
		}
		o.skills[mc.Method], o.chosen[mc.Method] = f, chosen
	}
	return o, nil
}

// drawFigures writes the figures as PNG and SVG and returns their file
// names.
func (o *outputs) drawFigures(dir string) ([]string, error) {
	var files []string
	save := func(f *figure.Figure, stem string) error {
		for _, ext := range []string{".png", ".svg"} {
			if err := f.Save(filepath.Join(dir, stem+ext)); err != nil {
				return err
			}
			files = append(files, stem+ext)
		}
		return nil
	}
	ret, err := figure.Returns(o.res, &figure.ReturnsOptions{Reference: referenceVariant(o.res)})
	if err != nil {
		return nil, err
	}
	if err := save(ret, "returns"); err != nil {
		return nil, err
	}
	succ, err := figure.Successor(o.g, o.named, &figure.SuccessorOptions{Gamma: o.e.TaskGamma, Log: true,
		Caption: "Invented depot floor."})
	if err != nil {
		return nil, err
	}
	if err := save(succ, "successor"); err != nil {
		return nil, err
	}
	for _, mc := range o.e.Methods {
		if f := o.skills[mc.Method]; f != nil {
			if err := save(f, "skills-"+mc.Method.String()); err != nil {
				return nil, err
			}
		}
	}
	return files, nil
}

// referenceVariant returns the name of a do-nothing reference variant of
// the results, if there is one.
func referenceVariant(res *experiment.Results) string {
	for _, v := range res.Variants {
		if v == "do-nothing" {
			return v
		}
	}
	return ""
}

// nextStatePhi is an agent's features as a feature map of the next state,
// phi(s, a, s') = phi(s'), the features its skills' SFs accumulate.
type nextStatePhi struct{ ag *transfer.Agent }

func (f nextStatePhi) Dim() int { return f.ag.Dim() }
func (f nextStatePhi) Features(dst []float64, _, _, next int) {
	f.ag.Phi(dst, next)
}

// writeArrays writes the NumPy arrays and their manifest into
// dir/arrays and returns the folder's files.
func (o *outputs) writeArrays(dir string) ([]string, error) {
	g, e := o.g, o.e
	n, na := g.NumStates(), g.MDP.NumActions()
	cells := make([]int64, 0, 2*n)
	for s := range n {
		r, c := g.Cell(s)
		cells = append(cells, int64(r), int64(c))
	}
	places := make([]float64, 0, n*e.Places.Dim())
	f := make([]float64, e.Places.Dim())
	for s := range n {
		e.Places.Features(f, s, 0, s)
		places = append(places, f...)
	}
	states := []string{"state", "to_state"}
	arrays := []experiment.Array{
		experiment.RecordsArray(o.res),
		experiment.SummaryArray(o.res),
		{Name: "cells", Description: "layout row and column of every state (states are the free cells in reading order)",
			Axes: []string{"state", "coordinate"}, Shape: []int{n, 2}, Data: cells, Labels: map[string][]string{"coordinate": {"row", "col"}}},
		{Name: "place_features", Description: "place features of a state: 1 if the state carries the place label (the jobs' weights apply to these)",
			Axes: []string{"state", "place"}, Shape: []int{n, len(e.PlaceNames)}, Data: places, Labels: map[string][]string{"place": e.PlaceNames}},
	}
	for i, p := range o.named {
		name := []string{"successor_uniform", "successor_optimal", "successor_adapted"}[i]
		chain, err := g.MDP.ChainOf(p.Policy)
		if err != nil {
			return nil, err
		}
		var m mat.Dense
		if err := linalg.Successor(&m, chain, e.TaskGamma); err != nil {
			return nil, err
		}
		arrays = append(arrays, experiment.Array{Name: name,
			Description: fmt.Sprintf("successor matrix M = (I - gamma P_pi)^-1, gamma = %v, of the %s (run seed %d); M[s, s'] = expected discounted visits to s' from s", e.TaskGamma, p.Name, o.seed),
			Axes:        states, Shape: []int{n, n}, Data: m.RawMatrix().Data})
	}
	for _, mc := range e.Methods {
		ag := o.kept[mc.Method]
		if ag == nil {
			continue
		}
		m, d := mc.Method.String(), ag.Dim()
		phi := make([]float64, n*d)
		for s := range n {
			ag.Phi(phi[s*d:(s+1)*d], s)
		}
		zs := make([]float64, 0, ag.NumSkills()*d)
		for k := range ag.NumSkills() {
			zs = append(zs, ag.Skill(k)...)
		}
		chosen := o.chosen[mc.Method]
		labels := make([]string, len(chosen))
		psi := make([]float64, 0, len(chosen)*n*na*d)
		exact := make([]float64, 0, len(chosen)*n*na*d)
		pols := figure.SkillPolicies(ag.USF())
		gamma := ag.Config().SkillGamma
		for i, k := range chosen {
			labels[i] = strconv.Itoa(k)
			for s := range n {
				psi = append(psi, ag.SkillState(k, s)...)
			}
			tab, err := sf.Exact(g.MDP, pols[k], nextStatePhi{ag}, gamma)
			if err != nil {
				return nil, err
			}
			for s := range n {
				for a := range na {
					exact = append(exact, tab.Row(s, a)...)
				}
			}
		}
		who := fmt.Sprintf("%s agent of run seed %d", m, o.seed)
		skillAxes := []string{"skill", "state", "action", "feature"}
		shape := []int{len(chosen), n, na, d}
		arrays = append(arrays,
			experiment.Array{Name: "phi_" + m, Description: fmt.Sprintf("features phi(s) of the %s (phi(s, a, s') = phi(s'))", who),
				Axes: []string{"state", "feature"}, Shape: []int{n, d}, Data: phi},
			experiment.Array{Name: "skills_" + m, Description: fmt.Sprintf("skill (task) vectors w_k of the %s", who),
				Axes: []string{"skill", "feature"}, Shape: []int{ag.NumSkills(), d}, Data: zs},
			experiment.Array{Name: "psi_" + m, Description: fmt.Sprintf("learned successor features psi(s, a, w_k) of the skills shown in skills-%s.png, %s; gamma = %v", m, who, gamma),
				Axes: skillAxes, Shape: shape, Data: psi, Labels: map[string][]string{"skill": labels}},
			experiment.Array{Name: "psi_exact_" + m, Description: fmt.Sprintf("exact successor features (sf.Exact) of the same skills' greedy policies for the features phi_%s, gamma = %v", m, gamma),
				Axes: skillAxes, Shape: shape, Data: exact, Labels: map[string][]string{"skill": labels}},
		)
	}
	man, err := experiment.WriteArrays(filepath.Join(dir, arraysDir), arrays,
		"the depot floor and the jobs are invented demo data, not a real site",
		"states index the free cells in reading order (cells.npy gives row and column); actions are up, right, down, left, stay")
	if err != nil {
		return nil, err
	}
	files := []string{filepath.Join(arraysDir, experiment.ManifestFile)}
	for _, a := range man.Arrays {
		files = append(files, filepath.Join(arraysDir, a.File))
	}
	slices.Sort(files[1:])
	return files, nil
}
