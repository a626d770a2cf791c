package fitterhost_test

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"

	"github.com/mixd-dev/mixd/daemon/fitterhost"
	"github.com/mixd-dev/mixd/fitters"
)

// How the daemon sets up its fitter host: built-in fitters run as
// `<daemon executable> fitter <name>`, external ones come from a directory.
// (Not run here: it starts processes.)
func ExampleNew() {
	exe, err := os.Executable()
	if err != nil {
		panic(err)
	}
	host, err := fitterhost.New(fitterhost.Config{
		SelfExecutable: exe,
		BuiltIn:        []string{"em"},
		PluginDir:      "/var/lib/mixd/fitters",
		Logger:         slog.Default(),
	})
	if err != nil {
		panic(err)
	}
	defer host.Close()
	for _, e := range host.List() {
		fmt.Println(e.Info.Name, e.Info.Version, e.Source)
	}
	data := fitters.Data{Rows: 4, Cols: 1, Values: []float64{41.2, 40.8, 18.5, 19.1}}
	res, err := host.Fit(context.Background(), "em", data, fitters.Settings{Components: 2, Seed: 1}, nil)
	switch {
	case errors.Is(err, fitterhost.ErrUnavailable):
		fmt.Println("retry later:", err)
	case err != nil:
		fmt.Println("fit failed:", fitters.CodeOf(err), err)
	default:
		fmt.Println(len(res.Params.Components), "components")
	}
}
