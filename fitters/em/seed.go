package em

import (
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters"
)

// startState builds the starting parameters of one restart for k
// components: the caller's start or labels, else k-means++ seeds on
// standardised features with a nearest-seed assignment.
func (p *problem) startState(cfg *config, k int, rng *rand.Rand) (*state, error) {
	st := newState(k, p.D, p.Structure)
	if err := p.Begin(&st.State, cfg.start.Params, cfg.start.Labels, rng, seedingShort); err != nil {
		return nil, err
	}
	st.setLogConst()
	return st, nil
}

// seedingShort is the error when only seeded of k components could be seeded.
func seedingShort(seeded, k int) error {
	return fitters.Errorf(fitters.FailedPrecondition,
		"seeding: only %d of the %d requested components could be seeded: the remaining rows differ from the seeds by less than double precision resolves at the data's scale", seeded, k)
}
