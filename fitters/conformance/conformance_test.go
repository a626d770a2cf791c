package conformance_test

import (
	"context"
	"math"
	"os"
	"os/exec"
	"strings"
	"sync/atomic"
	"testing"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/conformance"
	"github.com/mixd-dev/mixd/fitters/em"
)

// harnessEnv names the fitter TestHarness runs the suite on.
const harnessEnv = "MIXD_CONFORMANCE_HARNESS"

// TestHarness runs the suite on a fitter chosen by harnessEnv. It runs only
// as a child process of TestSuiteCatchesBrokenFitters, which checks that the
// suite fails, and why.
func TestHarness(t *testing.T) {
	mode := os.Getenv(harnessEnv)
	if mode == "" {
		t.Skip("runs only as a child of TestSuiteCatchesBrokenFitters")
	}
	conformance.Run(t, func() fitters.Fitter { return &broken{mode: mode, inner: em.New()} })
}

// broken wraps the em fitter and breaks one rule of the contract.
type broken struct {
	mode  string
	inner fitters.Fitter
}

func (b *broken) Describe(ctx context.Context) (fitters.Info, error) { return b.inner.Describe(ctx) }

func (b *broken) Fit(ctx context.Context, d fitters.Data, s fitters.Settings, progress func(fitters.Progress)) (*fitters.Result, error) {
	switch b.mode {
	case "ignores-cancel":
		ctx = context.WithoutCancel(ctx)
	case "accepts-any-option":
		s.Options = nil
	}
	res, err := b.inner.Fit(ctx, d, s, progress)
	if err != nil {
		if b.mode == "wrong-code" {
			return nil, fitters.Errorf(fitters.Internal, "%v", err)
		}
		return nil, err
	}
	p := &res.Params
	switch b.mode {
	case "nan":
		p.Components[0].Mean[0] = math.NaN()
	case "weights":
		for i := range p.Components {
			p.Components[i].Weight *= 0.9
		}
	case "nondeterministic":
		// Different for every call, as if a clock or map order leaked in.
		p.Components[0].Mean[0] = math.Nextafter(p.Components[0].Mean[0], math.Inf(int(calls.Add(1))%2*2-1))
	case "mutates-input":
		d.Values[0]++
	case "wrong-k":
		p.Components = p.Components[:1]
		p.Components[0].Weight = 1
	}
	return res, nil
}

// calls counts the fits of the "nondeterministic" fitter.
var calls atomic.Int64

// TestSuiteCatchesBrokenFitters runs the suite on fitters that each break one
// rule, in child processes, and checks that the suite fails for that reason.
// The unbroken fitter passes the same subtests.
func TestSuiteCatchesBrokenFitters(t *testing.T) {
	tests := []struct {
		mode, run, want string
	}{
		{"em", "RecoversSeparatedMixture|DeterministicBySeed|BadInput|Cancellation/AlreadyCancelled", ""},
		{"nan", "RecoversSeparatedMixture", "component 0: mean[0] is NaN"},
		{"weights", "RecoversSeparatedMixture", "weights sum to"},
		{"wrong-k", "RecoversSeparatedMixture", "1 components, requested 2"},
		{"nondeterministic", "DeterministicBySeed", "two fits with the same data, settings and seed differ"},
		{"mutates-input", "RecoversSeparatedMixture", "the fitter modified the data it was given"},
		{"wrong-code", "BadInput/NaN$", "has code 0, want 1"},
		{"accepts-any-option", "BadInput/unknown_option", "no error"},
		{"ignores-cancel", "Cancellation/AlreadyCancelled", "want code Canceled"},
	}
	for _, tt := range tests {
		t.Run(tt.mode, func(t *testing.T) {
			cmd := exec.Command(os.Args[0], "-test.run=^TestHarness$/"+tt.run, "-test.v")
			cmd.Env = append(os.Environ(), harnessEnv+"="+tt.mode, "GORACE=atexit_sleep_ms=0")
			out, err := cmd.CombinedOutput()
			if tt.want == "" {
				if err != nil || !strings.Contains(string(out), "--- PASS: TestHarness") {
					t.Fatalf("the unbroken fitter failed (%v):\n%s", err, out)
				}
				return
			}
			if err == nil {
				t.Fatalf("the suite passed a fitter that breaks the contract:\n%s", out)
			}
			if !strings.Contains(string(out), tt.want) {
				t.Fatalf("the suite failed, but not with %q:\n%s", tt.want, out)
			}
		})
	}
}
