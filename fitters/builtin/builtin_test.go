package builtin_test

import (
	"context"
	"slices"
	"testing"

	"github.com/mixd-dev/mixd/fitters/builtin"
)

func TestRegistry(t *testing.T) {
	names := builtin.Names()
	if !slices.IsSorted(names) {
		t.Errorf("Names() = %v, not sorted", names)
	}
	if !slices.Contains(names, "em") {
		t.Fatalf("Names() = %v, want it to contain em", names)
	}
	for _, name := range names {
		f, ok := builtin.New(name)
		if !ok || f == nil {
			t.Fatalf("New(%q) = %v, %v", name, f, ok)
		}
		// Each fitter describes itself under its registry name.
		info, err := f.Describe(context.Background())
		if err != nil {
			t.Fatalf("%s: Describe: %v", name, err)
		}
		if info.Name != name {
			t.Errorf("New(%q) describes itself as %q", name, info.Name)
		}
	}
	if f, ok := builtin.New("no-such-fitter"); ok || f != nil {
		t.Errorf("New(unknown) = %v, %v; want nil, false", f, ok)
	}
}
