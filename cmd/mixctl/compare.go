package main

import (
	"flag"
	"fmt"
	"strconv"
	"strings"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// parseModelRef splits "MODEL" or "MODEL@VERSION" (version 0: the newest).
func parseModelRef(arg string) (string, int64, error) {
	name, ver, found := strings.Cut(arg, "@")
	if name == "" {
		return "", 0, usagef("compare: %q: want MODEL or MODEL@VERSION", arg)
	}
	if !found {
		return name, 0, nil
	}
	v, err := strconv.ParseInt(ver, 10, 64)
	if err != nil || v < 1 {
		return "", 0, usagef("compare: %q: the version after @ must be a positive whole number", arg)
	}
	return name, v, nil
}

func compareCommand(fs *flag.FlagSet) runner {
	samples := fs.Int64("samples", 0, "draws per direction for the KL estimates (default: the daemon's, 20000)")
	seed := fs.Uint64("seed", 0, "seed of the draws; the same seed gives the same numbers")
	format := fs.String("format", "text", "output: text or json")
	return func(a *app, pos []string) error {
		if err := checkFormat("compare", *format, "text", "json"); err != nil {
			return err
		}
		if *samples < 0 {
			return usagef("compare: --samples %d: want a positive number of draws", *samples)
		}
		p, pv, err := parseModelRef(pos[0])
		if err != nil {
			return err
		}
		q, qv, err := parseModelRef(pos[1])
		if err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		res, err := c.CompareModels(a.ctx, p, pv, q, qv, mixdclient.CompareOptions{Samples: *samples, Seed: *seed})
		if err != nil {
			return err
		}
		if *format == "json" {
			return writeJSON(a.stdout, res)
		}
		return printComparison(a, res, *seed)
	}
}

// printComparison writes the comparison for people.
func printComparison(a *app, res *mixdv1.CompareModelsResponse, seed uint64) error {
	kv := newKV(a.stdout)
	kv.add("p", fmt.Sprintf("%s version %d", res.GetModel(), res.GetVersion()))
	kv.add("q", fmt.Sprintf("%s version %d", res.GetOtherModel(), res.GetOtherVersion()))
	kv.add("draws", fmt.Sprintf("%d per direction, seed %d", res.GetSamples(), seed))
	kv.add("KL(p||q)", fmt.Sprintf("%.6g ± %.2g nats", res.GetKlForward(), res.GetKlForwardStandardError()))
	kv.add("KL(q||p)", fmt.Sprintf("%.6g ± %.2g nats", res.GetKlBackward(), res.GetKlBackwardStandardError()))
	if err := kv.flush(); err != nil {
		return err
	}
	fmt.Fprintf(a.stdout, "\ncomponents matched by %s distance:\n", res.GetComponentDistance())
	tw := newTable(a.stdout, "P", "Q", "DISTANCE", "WEIGHT_P", "WEIGHT_Q")
	for _, m := range res.GetMatches() {
		tw.row(strconv.Itoa(int(m.GetComponent())), strconv.Itoa(int(m.GetOtherComponent())),
			fmt.Sprintf("%.4g", m.GetDistance()), fmt.Sprintf("%.4g", m.GetWeight()), fmt.Sprintf("%.4g", m.GetOtherWeight()))
	}
	if err := tw.flush(); err != nil {
		return err
	}
	if u := res.GetUnmatchedComponents(); len(u) > 0 {
		fmt.Fprintf(a.stdout, "components of p without a partner: %v\n", u)
	}
	if u := res.GetUnmatchedOtherComponents(); len(u) > 0 {
		fmt.Fprintf(a.stdout, "components of q without a partner: %v\n", u)
	}
	return nil
}
