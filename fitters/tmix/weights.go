package tmix

import (
	"fmt"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// RowWeights sets out[i] to the latent weight of row i of the row-major
// matrix x (m.Dim() columns, finite values) under the Student-t model m: the
// posterior expectation
//
//	u_i = Σ_k τ_ik (ν_k + p) / (ν_k + δ_ik)
//
// with τ_ik the posterior probability of component k and δ_ik the squared
// Mahalanobis distance of the row from it. It is the weight the row gets in
// the mean and scale updates of the fit: close to 1 (above 1 near a centre)
// for typical rows and near 0 for rows far out in the tails, which is how
// the t mixture keeps gross errors from pulling its means. len(out) must
// equal the number of rows. It returns an error for a model that is not
// Student-t.
func RowWeights(m *mixture.Model, x []float64, out []float64) error {
	if m.Family() != mixture.StudentT {
		return fmt.Errorf("row weights: model family is %s, want student_t", m.Family())
	}
	d, k := m.Dim(), m.K()
	if len(x)%d != 0 {
		return fmt.Errorf("row weights: x has %d values, not a multiple of dim %d", len(x), d)
	}
	rows := len(x) / d
	if len(out) != rows {
		return fmt.Errorf("row weights: out has %d values, want %d (one per row)", len(out), rows)
	}
	dist := make([]float64, rows*k)
	post := make([]float64, rows*k)
	if err := m.Mahalanobis(x, dist); err != nil {
		return fmt.Errorf("row weights: %w", err)
	}
	if err := m.Posteriors(x, nil, post, nil); err != nil {
		return fmt.Errorf("row weights: %w", err)
	}
	p := float64(d)
	comps := m.Params().Components
	for i := 0; i < rows; i++ {
		var u float64
		for c, comp := range comps {
			if t := post[i*k+c]; t > 0 {
				u += t * (comp.DF + p) / (comp.DF + dist[i*k+c])
			}
		}
		out[i] = u
	}
	return nil
}
