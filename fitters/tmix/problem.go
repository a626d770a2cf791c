package tmix

import (
	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/layout"
	"github.com/mixd-dev/mixd/fitters/internal/prep"
)

// problem is the validated training data plus what every restart shares:
// the data summary (relative weights w/max(w), so that no weighted sum can
// overflow), the fixed row chunks of the parallel passes and, once
// prepared, the structure, ridge, variance floors and the fallback scale
// matrix of the collapse policy.
type problem struct {
	layout.Frame
	cfg    *config
	chunks []span // fixed row chunks of every parallel pass
}

// span is a half-open range of rows.
type span struct{ lo, hi int }

// newProblem validates the data matrix and weights and computes the
// per-feature statistics. Errors name the row, column or field.
func newProblem(data fitters.Data) (*problem, error) {
	s, err := prep.Summarise(data, prep.Limits{MaxAbsValue: MaxAbsValue})
	if err != nil {
		return nil, err
	}
	p := &problem{Frame: layout.Frame{Summary: *s, Who: Name, Noun: "scale matrix"}}
	for lo := 0; lo < p.N; lo += chunkRows {
		p.chunks = append(p.chunks, span{lo, min(p.N, lo+chunkRows)})
	}
	return p, nil
}

// prepare computes what depends on the settings: the variance floors and
// the fallback scale matrix used by the collapse policy, which must itself
// be acceptable.
func (p *problem) prepare(cfg *config) error {
	p.cfg = cfg
	return p.Prepare(cfg.Structure, cfg.ridge, cfg.minRows, VarianceFloor)
}
