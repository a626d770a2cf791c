package builtin_test

import (
	"fmt"

	"github.com/mixd-dev/mixd/fitters/builtin"
)

func ExampleNames() {
	for _, name := range builtin.Names() {
		f, _ := builtin.New(name)
		fmt.Printf("%s: %T\n", name, f)
	}
	// Output:
	// em: *em.Fitter
	// tmix: *tmix.Fitter
	// vb: *vb.Fitter
}
