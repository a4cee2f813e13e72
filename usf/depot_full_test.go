//go:build !race

package usf

import "testing"

// TestNeuralDepot is the held-out check of TestNeuralDepotSmall with the
// default network (hidden 128 x 128) and 10000 updates; it takes about 20 s
// on one core, so it is left out of -race runs. Measured on linux/amd64:
// mean relative error of psi . z against Q^{pi_z} 0.24 (max over (s, a) and
// z: 1.1), mean relative regret 0.12 (untrained: 0.72; linear USF: error
// 0.87, regret 0.98). Tolerances: error 0.32, regret 0.18, and at most
// half of the baselines.
func TestNeuralDepot(t *testing.T) {
	if testing.Short() {
		t.Skip("20 s of training")
	}
	runDepot(t, depotCase{hidden: []int{128, 128}, updates: 10000, lr: 1e-3, maxMeanErr: 0.32, maxRegret: 0.18})
}
