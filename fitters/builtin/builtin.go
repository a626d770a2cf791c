// Package builtin is the registry of the fitters compiled into the mixd
// binary. The daemon runs each of them as a child process of its own
// executable (`mixd fitter <name>`), which calls fitters.Serve(New(name)).
package builtin

import (
	"sort"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/em"
	"github.com/mixd-dev/mixd/fitters/tmix"
	"github.com/mixd-dev/mixd/fitters/vb"
)

// registry maps a built-in fitter's name to its constructor.
var registry = map[string]func() fitters.Fitter{
	"em":   func() fitters.Fitter { return em.New() },
	"tmix": func() fitters.Fitter { return tmix.New() },
	"vb":   func() fitters.Fitter { return vb.New() },
}

// Names returns the names of the built-in fitters, sorted.
func Names() []string {
	names := make([]string, 0, len(registry))
	for name := range registry {
		names = append(names, name)
	}
	sort.Strings(names)
	return names
}

// New returns a new instance of the built-in fitter called name, and false
// when there is none by that name.
func New(name string) (fitters.Fitter, bool) {
	mk, ok := registry[name]
	if !ok {
		return nil, false
	}
	return mk(), true
}
