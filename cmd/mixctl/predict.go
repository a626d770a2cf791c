package main

import (
	"flag"
	"fmt"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
)

// rowCell is row i of the table as one list cell, with its unobserved
// values marked.
func (t *table) rowCell(i int) cell {
	c := lcell(t.data.Row(i))
	if t.observed != nil {
		c.obs = t.observed[i*t.data.Cols : (i+1)*t.data.Cols]
	}
	return c
}

func predictCommand(fs *flag.FlagSet) runner {
	r := &rowFlags{}
	fs.StringVar(&r.model, "model", "", "model id (required)")
	fs.Int64Var(&r.version, "version", 0, "model version (default: the newest)")
	fs.StringVar(&r.format, "format", "csv", "output: csv or jsonl (one JSON object per row)")
	fs.StringVar(&r.columns, "columns", "", "comma-separated CSV column `names` to use, in the model's order (default: the model's feature names, else every column)")
	std := fs.Bool("std", false, "add the conditional standard deviation of every feature (columns FEATURE_sd; 0 where the value was given)")
	draws := fs.Int("draws", 0, "print `N` completed rows drawn from each row's conditional distribution instead of the means (multiple imputation; columns row, draw and the features)")
	seed := fs.Uint64("seed", 0, "seed of --draws; the same seed gives the same draws")
	return func(a *app, pos []string) error { return a.predict(r, *std, *draws, *seed, pos[0]) }
}

func (a *app) predict(r *rowFlags, std bool, draws int, seed uint64, path string) error {
	if draws < 0 {
		return usagef("predict: --draws %d: want a non-negative number of draws per row", draws)
	}
	if draws > 0 && std {
		return usagef("predict: --std and --draws do not combine: --draws prints drawn rows, not means")
	}
	c, m, t, err := a.load("predict", r, path)
	if err != nil {
		return err
	}
	if t.observed == nil {
		fmt.Fprintf(a.stderr, "mixctl: predict: %s has no empty cells, so there is nothing to predict; the rows are printed unchanged\n", t.source)
	}
	res, err := c.Predict(a.ctx, m.GetName(), t.data, t.observed, mixdclient.PredictOptions{
		Version: m.GetVersion(), StdDevs: std, Draws: draws, Seed: seed,
	})
	if err != nil {
		return err
	}
	jsonl := r.format == "jsonl"
	header := []string{"row"}
	keys := []string{"row"}
	if draws > 0 {
		header = append(header, "draw")
		keys = append(keys, "draw")
	}
	header = append(header, t.header...)
	keys = append(keys, "values")
	if std {
		for _, h := range t.header {
			header = append(header, h+"_sd")
		}
		keys = append(keys, "sd")
	}
	rw := newRowWriter(a.stdout, jsonl, header)
	for i := range t.data.Rows {
		if draws > 0 {
			for d := range draws {
				cells := []cell{icell(int64(i + 1)), icell(int64(d + 1)), lcell(res.Draws.Row(i*draws + d))}
				if err := rw.write(keys, cells); err != nil {
					return fmt.Errorf("write output: %w", err)
				}
			}
			continue
		}
		cells := []cell{icell(int64(i + 1)), lcell(res.Means.Row(i))}
		if std {
			cells = append(cells, lcell(res.StdDevs.Row(i)))
		}
		if err := rw.write(keys, cells); err != nil {
			return fmt.Errorf("write output: %w", err)
		}
	}
	return rw.flush()
}
