package tmix

import (
	"math"

	"github.com/mixd-dev/mixd/fitters/internal/layout"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// state is one set of Student-t mixture parameters in the flat layout used
// by the passes, with its factorisation: for full and tied scale matrices
// the passes solve with Chol, the Cholesky factors.
type state struct {
	layout.State
	df []float64 // K: degrees of freedom ν_k
	// logConst[k] = log w_k + log Γ((ν+D)/2) − log Γ(ν/2) − (D/2) log(νπ) − ½ log|Σ_k|.
	logConst []float64
}

func newState(k, d int, s mixture.Structure) *state {
	return &state{State: layout.NewState(k, d, s, false), df: make([]float64, k), logConst: make([]float64, k)}
}

// logNorm is the log normalising constant of component k without its weight.
func (st *state) logNorm(k int) float64 {
	return mixture.LogNormalizer(mixture.StudentT, st.D, st.df[k], st.LogDet[st.CovIndex(k)])
}

// setLogConst recomputes the per-component constants from weights, degrees
// of freedom and log-determinants.
func (st *state) setLogConst() {
	for k := 0; k < st.K; k++ {
		st.logConst[k] = math.Log(st.Weight[k]) + st.logNorm(k)
	}
}

// params converts st into model parameters with full d×d scale matrices.
func (st *state) params() mixture.Params { return st.Params(mixture.StudentT, st.df) }
