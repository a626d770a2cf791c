package main

import (
	"bufio"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// rowFlags are the flags shared by score and classify.
type rowFlags struct {
	model     string
	version   int64
	format    string
	columns   string
	withInput bool
}

func (r *rowFlags) define(fs *flag.FlagSet) {
	fs.StringVar(&r.model, "model", "", "model id (required)")
	fs.Int64Var(&r.version, "version", 0, "model version (default: the newest)")
	fs.StringVar(&r.format, "format", "csv", "output: csv or jsonl (one JSON object per row)")
	fs.StringVar(&r.columns, "columns", "", "comma-separated CSV column `names` to use, in the model's order (default: the model's feature names, else every column)")
	fs.BoolVar(&r.withInput, "with-input", false, "repeat the input columns in the output")
}

// load checks the flags, fetches the model version (so every later call uses
// the same version) and reads the CSV columns that match its features.
func (a *app) load(cmd string, r *rowFlags, path string) (*mixdclient.Client, *mixdv1.Model, *table, error) {
	if r.model == "" {
		return nil, nil, nil, usagef("%s: --model is required", cmd)
	}
	if err := checkFormat(cmd, r.format, "csv", "jsonl"); err != nil {
		return nil, nil, nil, err
	}
	t, err := a.readTable(path)
	if err != nil {
		return nil, nil, nil, err
	}
	c, err := a.dial()
	if err != nil {
		return nil, nil, nil, err
	}
	m, err := c.GetModel(a.ctx, r.model, r.version)
	if err != nil {
		return nil, nil, nil, err
	}
	t, err = matchColumns(t, m.GetParameters(), splitList(r.columns))
	if err != nil {
		return nil, nil, nil, err
	}
	return c, m, t, nil
}

// matchColumns picks the columns of t that feed the model: the named ones
// when given, else the model's feature names when the header has them all,
// else every column when their number is the model's dimension.
func matchColumns(t *table, p *mixdv1.Parameters, named []string) (*table, error) {
	dim := int(p.GetDimension())
	if len(named) > 0 {
		if len(named) != dim {
			return nil, inputf("--columns names %d columns, the model has %d features", len(named), dim)
		}
		return t.selectColumns(named)
	}
	if feats := p.GetFeatureNames(); len(feats) > 0 {
		var missing []string
		have := make(map[string]bool, len(t.header))
		for _, h := range t.header {
			have[h] = true
		}
		for _, f := range feats {
			if !have[f] {
				missing = append(missing, f)
			}
		}
		if len(missing) == 0 {
			return t.selectColumns(feats)
		}
		if len(t.header) != dim {
			return nil, inputf("%s: no column named %s (the model's features are %s; use --columns to map them)",
				t.source, strings.Join(quoteAll(missing), ", "), strings.Join(feats, ", "))
		}
	}
	if len(t.header) != dim {
		return nil, inputf("%s has %d columns, the model has %d features (use --columns to choose)", t.source, len(t.header), dim)
	}
	return t, nil
}

func quoteAll(s []string) []string {
	out := make([]string, len(s))
	for i, v := range s {
		out[i] = strconv.Quote(v)
	}
	return out
}

// rowWriter writes per-row results as CSV or JSON lines.
type rowWriter struct {
	w      *bufio.Writer
	jsonl  bool
	header []string
	buf    []byte
}

func newRowWriter(w io.Writer, jsonl bool, header []string) *rowWriter {
	rw := &rowWriter{w: bufio.NewWriterSize(w, 1<<16), jsonl: jsonl, header: header}
	if !jsonl {
		rw.w.WriteString(strings.Join(csvQuoteAll(header), ","))
		rw.w.WriteByte('\n')
	}
	return rw
}

// csvQuoteAll quotes header names that need it.
func csvQuoteAll(names []string) []string {
	out := make([]string, len(names))
	for i, n := range names {
		if strings.ContainsAny(n, ",\"\r\n") {
			n = `"` + strings.ReplaceAll(n, `"`, `""`) + `"`
		}
		out[i] = n
	}
	return out
}

// cell is one output value: a number, an integer, a boolean or a list.
type cell struct {
	f    float64
	i    int64
	b    bool
	list []float64
	obs  []bool // for a list: false marks an unobserved value (empty in CSV, null in JSON)
	kind byte   // 'f', 'i', 'b', 'l'
}

func fcell(v float64) cell   { return cell{f: v, kind: 'f'} }
func icell(v int64) cell     { return cell{i: v, kind: 'i'} }
func bcell(v bool) cell      { return cell{b: v, kind: 'b'} }
func lcell(v []float64) cell { return cell{list: v, kind: 'l'} }
func (c cell) csv(b []byte) []byte {
	switch c.kind {
	case 'f':
		return strconv.AppendFloat(b, c.f, 'g', -1, 64)
	case 'i':
		return strconv.AppendInt(b, c.i, 10)
	case 'b':
		return strconv.AppendBool(b, c.b)
	}
	for i, v := range c.list {
		if i > 0 {
			b = append(b, ',')
		}
		if c.obs != nil && !c.obs[i] {
			continue
		}
		b = strconv.AppendFloat(b, v, 'g', -1, 64)
	}
	return b
}

func (c cell) json(b []byte) []byte {
	switch c.kind {
	case 'f':
		return appendJSONFloat(b, c.f)
	case 'i':
		return strconv.AppendInt(b, c.i, 10)
	case 'b':
		return strconv.AppendBool(b, c.b)
	}
	b = append(b, '[')
	for i, v := range c.list {
		if i > 0 {
			b = append(b, ',')
		}
		if c.obs != nil && !c.obs[i] {
			b = append(b, "null"...)
			continue
		}
		b = appendJSONFloat(b, v)
	}
	return append(b, ']')
}

// write writes one row. For CSV a list cell expands into several columns;
// for JSON lines keys name the cells (keys[i] for cells[i]).
func (rw *rowWriter) write(keys []string, cells []cell) error {
	b := rw.buf[:0]
	if rw.jsonl {
		b = append(b, '{')
		for i, c := range cells {
			if i > 0 {
				b = append(b, ',')
			}
			k, _ := json.Marshal(keys[i])
			b = append(b, k...)
			b = append(b, ':')
			b = c.json(b)
		}
		b = append(b, '}')
	} else {
		for i, c := range cells {
			if i > 0 {
				b = append(b, ',')
			}
			b = c.csv(b)
		}
	}
	b = append(b, '\n')
	rw.buf = b
	_, err := rw.w.Write(b)
	return err
}

func (rw *rowWriter) flush() error {
	if err := rw.w.Flush(); err != nil {
		return fmt.Errorf("write output: %w", err)
	}
	return nil
}

func scoreCommand(fs *flag.FlagSet) runner {
	r := &rowFlags{}
	r.define(fs)
	comps := fs.Bool("components", false, "add each component's log-density (columns component_K_log_density)")
	below := fs.Float64("below", 0, "print only rows whose percentile is below this `percent` (e.g. 1 = rarer than 99% of the training rows)")
	level := fs.Float64("outlier-level", 0, "Student-t models: `level` of the outlier rule, in (0, 1) (default: the level stored with the model)")
	onlyOutliers := fs.Bool("outliers", false, "Student-t models: print only rows flagged as outliers")
	return func(a *app, pos []string) error {
		return a.score(r, scoreChoices{comps: *comps, below: *below, level: *level, onlyOutliers: *onlyOutliers}, pos[0])
	}
}

// scoreChoices are the score command's own flags.
type scoreChoices struct {
	comps        bool
	below        float64
	level        float64
	onlyOutliers bool
}

func (a *app) score(r *rowFlags, sc scoreChoices, path string) error {
	comps, below := sc.comps, sc.below
	if below < 0 || below > 100 {
		return usagef("score: --below %v: want a percent in (0, 100]", below)
	}
	if sc.level < 0 || sc.level >= 1 {
		return usagef("score: --outlier-level %v: want a level in (0, 1)", sc.level)
	}
	c, m, t, err := a.load("score", r, path)
	if err != nil {
		return err
	}
	res, err := c.Score(a.ctx, m.GetName(), t.data, mixdclient.ScoreOptions{Version: m.GetVersion(), ComponentLogDensities: comps, OutlierLevel: sc.level, Observed: t.observed})
	if err != nil {
		return err
	}
	robust := res.Outliers != nil
	if sc.onlyOutliers && !robust {
		return usagef("score: --outliers: model %s is not a Student-t model, so it flags no outliers (use --below for rare rows)", m.GetName())
	}
	k := len(m.GetParameters().GetComponents())
	keys := []string{"row"}
	header := []string{"row"}
	if r.withInput {
		if r.format == "jsonl" {
			keys = append(keys, "input")
		}
		header = append(header, t.header...)
	}
	keys = append(keys, "log_density", "percentile")
	header = append(header, "log_density", "percentile")
	if robust {
		keys = append(keys, "outlier_statistic", "outlier")
		header = append(header, "outlier_statistic", "outlier")
	}
	if comps {
		keys = append(keys, "component_log_densities")
		for j := range k {
			header = append(header, fmt.Sprintf("component_%d_log_density", j))
		}
	}
	rw := newRowWriter(a.stdout, r.format == "jsonl", header)
	for i := range t.data.Rows {
		if below > 0 && !(res.Percentiles[i] < below) {
			continue
		}
		if sc.onlyOutliers && !res.Outliers[i] {
			continue
		}
		cells := []cell{icell(int64(i + 1))}
		cells = append(cells, inputCells(r, t, i)...)
		cells = append(cells, fcell(res.LogDensities[i]), fcell(res.Percentiles[i]))
		if robust {
			cells = append(cells, fcell(res.OutlierStatistics[i]), bcell(res.Outliers[i]))
		}
		if comps {
			cells = append(cells, lcell(res.ComponentLogDensities.Row(i)))
		}
		if err := rw.write(keys, cells); err != nil {
			return fmt.Errorf("write output: %w", err)
		}
	}
	return rw.flush()
}

// inputCells repeats row i's input values when --with-input is set: one
// list cell (a JSON array in the order of the CSV header), unobserved
// values empty (CSV) or null (JSON).
func inputCells(r *rowFlags, t *table, i int) []cell {
	if !r.withInput {
		return nil
	}
	return []cell{t.rowCell(i)}
}

func classifyCommand(fs *flag.FlagSet) runner {
	r := &rowFlags{}
	r.define(fs)
	minPost := fs.Float64("min-posterior", 0, "mark rows whose largest posterior is below this `probability` as not confident (default: none)")
	posts := fs.Bool("posteriors", false, "add every component's posterior probability (columns posterior_K)")
	return func(a *app, pos []string) error { return a.classify(r, *minPost, *posts, pos[0]) }
}

func (a *app) classify(r *rowFlags, minPost float64, posts bool, path string) error {
	if minPost < 0 || minPost > 1 {
		return usagef("classify: --min-posterior %v: want a probability in [0, 1]", minPost)
	}
	c, m, t, err := a.load("classify", r, path)
	if err != nil {
		return err
	}
	res, err := c.Classify(a.ctx, m.GetName(), t.data, mixdclient.ClassifyOptions{Version: m.GetVersion(), MinPosterior: minPost, Posteriors: posts, Observed: t.observed})
	if err != nil {
		return err
	}
	k := len(m.GetParameters().GetComponents())
	keys := []string{"row"}
	header := []string{"row"}
	if r.withInput {
		if r.format == "jsonl" {
			keys = append(keys, "input")
		}
		header = append(header, t.header...)
	}
	keys = append(keys, "component", "max_posterior", "confident")
	header = append(header, "component", "max_posterior", "confident")
	if posts {
		keys = append(keys, "posteriors")
		for j := range k {
			header = append(header, fmt.Sprintf("posterior_%d", j))
		}
	}
	rw := newRowWriter(a.stdout, r.format == "jsonl", header)
	for i := range t.data.Rows {
		cells := []cell{icell(int64(i + 1))}
		cells = append(cells, inputCells(r, t, i)...)
		cells = append(cells, icell(int64(res.Components[i])), fcell(res.MaxPosteriors[i]), bcell(res.Confident[i]))
		if posts {
			cells = append(cells, lcell(res.Posteriors.Row(i)))
		}
		if err := rw.write(keys, cells); err != nil {
			return fmt.Errorf("write output: %w", err)
		}
	}
	return rw.flush()
}

func sampleCommand(fs *flag.FlagSet) runner {
	model := fs.String("model", "", "model id (required)")
	version := fs.Int64("version", 0, "model version (default: the newest)")
	count := fs.Int("count", 0, "number of rows to draw (required)")
	seed := fs.Uint64("seed", 0, "seed of the draw; the same seed gives the same rows")
	format := fs.String("format", "csv", "output: csv or jsonl")
	return func(a *app, _ []string) error {
		if *model == "" {
			return usagef("sample: --model is required")
		}
		if *count <= 0 {
			return usagef("sample: --count must be a positive number of rows")
		}
		if err := checkFormat("sample", *format, "csv", "jsonl"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		m, err := c.GetModel(a.ctx, *model, *version)
		if err != nil {
			return err
		}
		res, err := c.Sample(a.ctx, m.GetName(), *count, mixdclient.SampleOptions{Version: m.GetVersion(), Seed: *seed})
		if err != nil {
			return err
		}
		names := featureNames(m.GetParameters().GetFeatureNames(), res.Rows.Cols)
		header := append(append([]string(nil), names...), "component")
		keys := []string{"values", "component"}
		rw := newRowWriter(a.stdout, *format == "jsonl", header)
		for i := range res.Rows.Rows {
			if err := rw.write(keys, []cell{lcell(res.Rows.Row(i)), icell(int64(res.Components[i]))}); err != nil {
				return fmt.Errorf("write output: %w", err)
			}
		}
		return rw.flush()
	}
}

// featureNames returns the model's feature names, or x1..xD when it has none.
func featureNames(names []string, dim int) []string {
	if len(names) == dim {
		return names
	}
	out := make([]string, dim)
	for i := range out {
		out[i] = fmt.Sprintf("x%d", i+1)
	}
	return out
}

// checkFormat rejects a --format value not in allowed.
func checkFormat(cmd, format string, allowed ...string) error {
	for _, a := range allowed {
		if format == a {
			return nil
		}
	}
	return usagef("%s: --format %q: want %s", cmd, format, strings.Join(allowed, " or "))
}
