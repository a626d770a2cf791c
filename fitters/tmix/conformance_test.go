package tmix

import (
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/conformance"
)

// TestConformance runs the suite every mixd fitter must pass.
func TestConformance(t *testing.T) {
	conformance.Run(t, func() fitters.Fitter { return New() })
}
