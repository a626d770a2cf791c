package modeldoc

import (
	"github.com/mixd-dev/mixd/fitters/mixture"
	"github.com/mixd-dev/mixd/fitters/pbconv"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// checkMath runs the model mathematics' own validation on the parameters
// (fitters/mixture.New): weights summing to 1, symmetric positive-definite
// and well-conditioned covariances, the covariance structure's constraints,
// degrees of freedom. The document's shape has been checked already.
func checkMath(pb *mixdv1.Parameters) error {
	p, err := pbconv.ParamsFromProto(pb)
	if err != nil {
		return err
	}
	if _, err := mixture.New(p); err != nil {
		return err
	}
	return nil
}
