package sf

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/successor-go/successor/internal/vec"
	"github.com/successor-go/successor/linalg"
)

// TaskConfig configures InferTask and TaskEstimator. A nil *TaskConfig
// means the zero value: no projection.
type TaskConfig struct {
	// Unit projects the fitted w to the unit sphere, w / ||w|| (for skill
	// vectors, whose features live on the sphere). A zero w then gives an
	// error wrapping ErrZeroVector.
	Unit bool
}

// TaskFit reports how well a task vector explains the rewards.
type TaskFit struct {
	Samples int     // number of (phi, r) samples
	RSS     float64 // residual sum of squares sum_j (r_j - phi_j . w)^2 of the fitted (unprojected) w
	RMS     float64 // root-mean-square residual sqrt(RSS / Samples); 0 without samples
	Norm    float64 // ||w|| of the fitted w, before any projection
}

// InferTask sets dst to the task vector that best explains the rewards as
// r = phi . w, by ridge regression over the samples (rows of phis, n x d,
// with rewards r, len n):
//
//	w = argmin_w sum_j (r_j - phi_j . w)^2 + lambda ||w||^2,
//
// solved by linalg.Ridge (Householder QR of the augmented system), then
// projected to the unit sphere if s.Unit is set. It returns the fit of the
// unprojected w.
//
// Errors wrap ErrDimension (len(dst) != d, len(rewards) != n, no samples),
// ErrNonFinite, ErrConfig (lambda negative or not finite),
// linalg.ErrRankDeficient (lambda = 0 and phis without full column rank,
// e.g. fewer samples than features) or ErrZeroVector. On error dst is
// unchanged.
func InferTask(dst []float64, phis mat.Matrix, rewards []float64, lambda float64, s *TaskConfig) (TaskFit, error) {
	n, d := phis.Dims()
	if len(dst) != d {
		return TaskFit{}, fmt.Errorf("sf: infer task: dst has length %d, want %d: %w", len(dst), d, ErrDimension)
	}
	if len(rewards) != n {
		return TaskFit{}, fmt.Errorf("sf: infer task: %d rewards for %d samples: %w", len(rewards), n, ErrDimension)
	}
	if n == 0 {
		return TaskFit{}, fmt.Errorf("sf: infer task: no samples: %w", ErrDimension)
	}
	w := mat.NewVecDense(d, nil)
	rss, err := linalg.Ridge(w, phis, mat.NewVecDense(n, rewards), lambda)
	if err != nil {
		return TaskFit{}, fmt.Errorf("sf: infer task: %w", err)
	}
	fit := TaskFit{Samples: n, RSS: rss, RMS: math.Sqrt(rss / float64(n))}
	raw := w.RawVector().Data
	fit.Norm = math.Sqrt(vec.Dot(raw, raw))
	if s != nil && s.Unit {
		if err := unit(raw, fit.Norm); err != nil {
			return fit, fmt.Errorf("sf: infer task: %w", err)
		}
	}
	copy(dst, raw)
	return fit, nil
}

func unit(w []float64, norm float64) error {
	if norm == 0 {
		return ErrZeroVector
	}
	for i := range w {
		w[i] /= norm
	}
	return nil
}

// TaskEstimator infers a task vector online, by recursive least squares
// (linalg.RLS): after every labelled transition (phi, r) its w equals the
// InferTask answer for the samples seen so far with the same lambda (up to
// rounding), at O(d^2) per sample and no allocation. It is not safe for
// concurrent use.
type TaskEstimator struct {
	rls  *linalg.RLS
	unit bool
}

// NewTaskEstimator returns an estimator of d task weights with ridge
// strength lambda > 0 (recursive least squares starts from the prior
// w = 0 with precision lambda; a small lambda such as 1e-6 approximates
// plain least squares). Errors wrap ErrDimension or ErrConfig.
func NewTaskEstimator(d int, lambda float64, s *TaskConfig) (*TaskEstimator, error) {
	r, err := linalg.NewRLS(d, lambda)
	if err != nil {
		return nil, fmt.Errorf("sf: task estimator: %w", err)
	}
	return &TaskEstimator{rls: r, unit: s != nil && s.Unit}, nil
}

// Observe adds the labelled transition with features phi and reward r. It
// returns an error wrapping ErrNonFinite, and ignores the sample, if phi or
// r holds NaN or an infinity, or if finite values would overflow the
// update (features of 1e200, whose squared norm is not a float64; see
// linalg.RLS.Update). It panics if len(phi) != d. It does not allocate.
func (e *TaskEstimator) Observe(phi []float64, r float64) error {
	if len(phi) != e.rls.Dim() {
		panic(fmt.Sprintf("sf: task estimator: features have length %d, want %d", len(phi), e.rls.Dim()))
	}
	if err := e.rls.Update(phi, r); err != nil {
		return fmt.Errorf("sf: task estimator: %w", err)
	}
	return nil
}

// Task writes the current w into dst (projected to the unit sphere if the
// settings ask). It returns an error wrapping ErrZeroVector if the
// projection meets w = 0 (e.g. before any non-zero reward). It panics if
// len(dst) != d. It does not allocate.
func (e *TaskEstimator) Task(dst []float64) error {
	e.rls.WeightsTo(dst)
	if e.unit {
		if err := unit(dst, math.Sqrt(vec.Dot(dst, dst))); err != nil {
			return fmt.Errorf("sf: task estimator: %w", err)
		}
	}
	return nil
}

// Fit reports the fit of the current (unprojected) w on the samples seen.
func (e *TaskEstimator) Fit() TaskFit {
	w := e.rls.Weights()
	f := TaskFit{Samples: e.rls.Count(), RSS: e.rls.RSS(), Norm: math.Sqrt(vec.Dot(w, w))}
	if f.Samples > 0 {
		f.RMS = math.Sqrt(f.RSS / float64(f.Samples))
	}
	return f
}

// Reset forgets all samples.
func (e *TaskEstimator) Reset() { e.rls.Reset() }
