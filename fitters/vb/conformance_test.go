package vb_test

import (
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/conformance"
	"github.com/mixd-dev/mixd/fitters/vb"
)

// TestConformance runs the suite every mixd fitter must pass.
func TestConformance(t *testing.T) {
	conformance.Run(t, func() fitters.Fitter { return vb.New() })
}
