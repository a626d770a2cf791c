package em

import (
	"math"

	"github.com/mixd-dev/mixd/fitters/internal/layout"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// log2Pi is log(2π).
var log2Pi = math.Log(2 * math.Pi)

// state is one set of mixture parameters in the flat layout used by the
// E-step, with its factorisation: for full and tied covariances the E-step
// uses White, the inverse of each Cholesky factor.
type state struct {
	layout.State
	logConst []float64 // K: log w_k − ½(D log 2π + log|Σ_k|)
}

func newState(k, d int, s mixture.Structure) *state {
	return &state{State: layout.NewState(k, d, s, true), logConst: make([]float64, k)}
}

// setLogConst recomputes the per-component constants from weights and
// log-determinants.
func (st *state) setLogConst() {
	for k := 0; k < st.K; k++ {
		st.logConst[k] = math.Log(st.Weight[k]) - 0.5*(float64(st.D)*log2Pi+st.LogDet[st.CovIndex(k)])
	}
}

// params converts st into model parameters with full d×d covariances.
func (st *state) params() mixture.Params { return st.Params(mixture.Gaussian, nil) }
