package tmix

import (
	"math/rand/v2"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/internal/seed"
)

// seedStream is the fixed second PCG word; the first is Settings.Seed. It
// is the em fitter's too, and the seeding follows the same steps, so the
// same data, K and seed give both fitters the same k-means++ starting
// partitions.
const seedStream = seed.Stream

// startState builds the starting parameters of one restart for k
// components: the caller's start or labels, else k-means++ seeds on
// standardised features with a nearest-seed assignment. The degrees of
// freedom come from the configuration (see config.startDF).
func (p *problem) startState(cfg *config, k int, rng *rand.Rand) (*state, error) {
	st := newState(k, p.D, p.Structure)
	copy(st.df, cfg.startDF(k, cfg.start.Params))
	if err := p.Begin(&st.State, cfg.start.Params, cfg.start.Labels, rng, seedingShort); err != nil {
		return nil, err
	}
	st.setLogConst()
	return st, nil
}

// seedingShort is the error when only seeded of k components could be seeded.
func seedingShort(_, k int) error {
	return fitters.Errorf(fitters.FailedPrecondition, "seeding: fewer than %d distinct rows with positive weight", k)
}
