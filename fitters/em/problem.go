package em

import (
	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/layout"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
)

// problem is the validated training data plus what every restart shares:
// the data summary (relative weights w/max(w), so that no weighted sum can
// overflow) and, once prepared, the structure, ridge, variance floors and
// the fallback covariance of the collapse policy.
type problem struct {
	layout.Frame
	cfg *config
}

// newProblem validates the data matrix and weights and computes the
// per-feature statistics.
func newProblem(data fitters.Data) (*problem, error) {
	s, err := prep.Summarise(data, prep.Limits{MaxAbsValue: MaxAbsValue, MaxWeight: MaxWeight})
	if err != nil {
		return nil, err
	}
	return &problem{Frame: layout.Frame{Summary: *s, Who: Name, Noun: "covariance"}}, nil
}

// prepare computes what depends on the settings: the variance floors and
// the fallback covariance used by the collapse policy, which must itself be
// acceptable.
func (p *problem) prepare(cfg *config) error {
	p.cfg = cfg
	return p.Prepare(cfg.Structure, cfg.ridge, cfg.minRows, VarianceFloor)
}
