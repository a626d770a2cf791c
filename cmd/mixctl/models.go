package main

import (
	"bytes"
	"encoding/json"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/types/known/timestamppb"

	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// commandNotes are extra paragraphs of `mixctl help COMMAND`.
var commandNotes = map[string]string{
	"fit": `The CSV file needs a header row; its column names become the model's
feature names. Progress goes to standard error: one line redrawn in place on
a terminal, one line per iteration otherwise, none with --quiet. The stored
model is printed on standard output when the fit ends. Ctrl-C cancels the fit.
With --detach the fit runs as a job in the daemon and mixctl prints only the
job name; follow it with 'mixctl watch JOB'.
`,
	"score": `Output columns: row (1-based data row of the input), the input columns
with --with-input, log_density (natural log of the mixture density at the
row) and percentile: the share, in percent, of the model's own training rows
whose log-density is lower. A percentile of 0.5 means the row is rarer than
99.5% of the training data. It measures rarity relative to the training data
only: it is not a diagnosis of a fault, and a row can be rare for harmless
reasons (or common while something is wrong). Decisions about equipment or
safety belong to the operator's own procedures.

Empty cells are unobserved values: such a row is scored by the marginal
mixture of its observed features (exact for Gaussian and Student-t
components). Its percentile is NaN (null in JSON) and --below skips it: a
density over fewer features cannot be compared with the training rows'.
`,
	"classify": `Output columns: row (1-based data row of the input), the input columns
with --with-input, component (0-based index of the most probable component),
max_posterior (its posterior probability) and confident (false when
max_posterior is below --min-posterior).

Empty cells are unobserved values: the posteriors are then those given the
observed features of the row only.
`,
	"predict": `Fills the empty cells of each row with their conditional mean given the
row's other values under the model (a mixture of the components'
conditionals, weighted by each component's posterior given the observed
values). Output columns: row (1-based data row of the input) and the model's
features, given values unchanged; --std adds FEATURE_sd columns, the
conditional standard deviations (0 for given values). --draws N prints N
completed rows per input row drawn from the conditional distribution instead
(columns row, draw, features), for multiple imputation; the same --seed gives
the same draws. A filled value is a model-based estimate, not a measurement.
`,
	"compare": `Compares two models, or two versions of one model (pumps@1 pumps@2), over
the same features. KL(p||q) is a Monte Carlo estimate, from --samples draws
of p, of the Kullback-Leibler divergence in nats, with its standard error; 0
means the models agree, and an estimate within a few standard errors of 0 is
no evidence of a difference. The components are paired so that the sum of
their Bhattacharyya distances is smallest (Student-t components through their
moment-matched Gaussians). A large divergence says the models spread
probability differently; it does not say why, nor whether it matters for a
given use.
`,
	"sample": `Output columns: the model's feature names (x1, x2, ... when it has none)
and component, the 0-based component each row was drawn from.
`,
	"delete": `Without --version every version of the model is deleted.
`,
}

// tableWriter writes aligned columns for people.
type tableWriter struct {
	tw *tabwriter.Writer
}

func newTable(w io.Writer, header ...string) *tableWriter {
	t := &tableWriter{tw: tabwriter.NewWriter(w, 0, 8, 2, ' ', 0)}
	t.row(header...)
	return t
}

func (t *tableWriter) row(cells ...string) {
	fmt.Fprintln(t.tw, strings.Join(cells, "\t"))
}

func (t *tableWriter) flush() error {
	if err := t.tw.Flush(); err != nil {
		return fmt.Errorf("write output: %w", err)
	}
	return nil
}

// kvWriter writes "key  value" lines, aligned.
type kvWriter struct{ tw *tabwriter.Writer }

func newKV(w io.Writer) *kvWriter { return &kvWriter{tw: tabwriter.NewWriter(w, 0, 8, 2, ' ', 0)} }

func (k *kvWriter) add(key, value string) { fmt.Fprintf(k.tw, "%s\t%s\n", key, value) }

func (k *kvWriter) flush() error {
	if err := k.tw.Flush(); err != nil {
		return fmt.Errorf("write output: %w", err)
	}
	return nil
}

var jsonOptions = protojson.MarshalOptions{UseProtoNames: true}

// stableJSON encodes m as indented JSON with protobuf field names. The
// output of protojson is re-indented so that it is byte-stable (protojson
// varies its whitespace on purpose).
func stableJSON(m proto.Message, prefix string) ([]byte, error) {
	b, err := jsonOptions.Marshal(m)
	if err != nil {
		return nil, fmt.Errorf("encode JSON: %w", err)
	}
	var compact, out bytes.Buffer
	if err := json.Compact(&compact, b); err != nil {
		return nil, fmt.Errorf("encode JSON: %w", err)
	}
	if err := json.Indent(&out, compact.Bytes(), prefix, "  "); err != nil {
		return nil, fmt.Errorf("encode JSON: %w", err)
	}
	return out.Bytes(), nil
}

// writeJSON writes one message as indented JSON (protobuf field names).
func writeJSON(w io.Writer, m proto.Message) error {
	b, err := stableJSON(m, "")
	if err != nil {
		return err
	}
	if _, err := fmt.Fprintf(w, "%s\n", b); err != nil {
		return fmt.Errorf("write output: %w", err)
	}
	return nil
}

// writeJSONList writes messages as one JSON array.
func writeJSONList[M proto.Message](w io.Writer, list []M) error {
	var buf bytes.Buffer
	buf.WriteString("[")
	for i, m := range list {
		if i > 0 {
			buf.WriteString(",")
		}
		b, err := stableJSON(m, "  ")
		if err != nil {
			return err
		}
		buf.WriteString("\n  ")
		buf.Write(b)
	}
	if len(list) > 0 {
		buf.WriteString("\n")
	}
	buf.WriteString("]\n")
	if _, err := w.Write(buf.Bytes()); err != nil {
		return fmt.Errorf("write output: %w", err)
	}
	return nil
}

// timeText formats a timestamp in UTC, or "-" when unset.
func timeText(ts *timestamppb.Timestamp) string {
	if ts == nil {
		return "-"
	}
	return ts.AsTime().UTC().Format(time.RFC3339)
}

// printModel writes a model for people (text) or as JSON.
func (a *app) printModel(m *mixdv1.Model, format string) error {
	if format == "json" {
		return writeJSON(a.stdout, m)
	}
	p, r := m.GetParameters(), m.GetReport()
	kv := newKV(a.stdout)
	kv.add("model", m.GetName())
	kv.add("version", strconv.FormatInt(m.GetVersion(), 10))
	kv.add("created", timeText(m.GetCreateTime()))
	feats := strings.Join(p.GetFeatureNames(), ", ")
	if feats == "" {
		feats = "(unnamed)"
	}
	kv.add("features", fmt.Sprintf("%d: %s", p.GetDimension(), feats))
	kv.add("components", fmt.Sprintf("%d, %s, %s covariance", len(p.GetComponents()), familyName(p.GetFamily()), structureName(p.GetCovarianceStructure())))
	if r != nil {
		kv.add("fitter", strings.TrimSpace(r.GetFitter()+" "+r.GetFitterVersion()))
		conv := "did not converge"
		if r.GetConverged() {
			conv = "converged"
		}
		kv.add("iterations", fmt.Sprintf("%d (%s)", r.GetIterations(), conv))
		kv.add("seed", strconv.FormatUint(r.GetSeed(), 10))
		kv.add("training rows", strconv.FormatInt(r.GetTrainingRows(), 10))
		kv.add("log-likelihood", fmt.Sprintf("%.4f", r.GetLogLikelihood()))
		if r.GetObjective() == "variational_bound" {
			kv.add("variational bound", fmt.Sprintf("%.4f", r.GetBound()))
		}
		kv.add("BIC", fmt.Sprintf("%.4f", r.GetBic()))
		kv.add("AIC", fmt.Sprintf("%.4f", r.GetAic()))
		if r.GetFlaggedRows() > 0 {
			kv.add("flagged rows", strconv.FormatInt(r.GetFlaggedRows(), 10))
		}
		if d := r.GetElapsed(); d != nil {
			kv.add("elapsed", d.AsDuration().Round(time.Millisecond).String())
		}
		for _, n := range r.GetNotes() {
			kv.add("note", n)
		}
	}
	if err := kv.flush(); err != nil {
		return err
	}
	if sel := r.GetSelection(); len(sel) > 0 {
		fmt.Fprintln(a.stdout, "\nchoice of K:")
		t := newTable(a.stdout, "  K", "LOG-LIKELIHOOD", "BIC", "AIC", "ITERATIONS", "CONVERGED")
		for _, s := range sel {
			t.row("  "+strconv.Itoa(int(s.GetComponents())), fmt.Sprintf("%.4f", s.GetLogLikelihood()),
				fmt.Sprintf("%.4f", s.GetBic()), fmt.Sprintf("%.4f", s.GetAic()),
				strconv.Itoa(int(s.GetIterations())), strconv.FormatBool(s.GetConverged()))
		}
		if err := t.flush(); err != nil {
			return err
		}
	}
	fmt.Fprintln(a.stdout, "\ncomponents:")
	names := featureNames(p.GetFeatureNames(), int(p.GetDimension()))
	header := append([]string{"  #", "WEIGHT"}, names...)
	header = append(header, "SD (sqrt of covariance diagonal)")
	if p.GetFamily() == mixdv1.Family_FAMILY_STUDENT_T {
		header = append(header, "DF")
	}
	t := newTable(a.stdout, header...)
	d := int(p.GetDimension())
	for i, c := range p.GetComponents() {
		cells := []string{"  " + strconv.Itoa(i), fmt.Sprintf("%.4f", c.GetWeight())}
		for _, v := range c.GetMean() {
			cells = append(cells, fmt.Sprintf("%.4g", v))
		}
		var sds []string
		cov := c.GetCovariance()
		for j := 0; j < d && j*d+j < len(cov); j++ {
			sds = append(sds, fmt.Sprintf("%.3g", math.Sqrt(cov[j*d+j])))
		}
		cells = append(cells, strings.Join(sds, " "))
		if p.GetFamily() == mixdv1.Family_FAMILY_STUDENT_T {
			cells = append(cells, fmt.Sprintf("%.3g", c.GetDegreesOfFreedom()))
		}
		t.row(cells...)
	}
	return t.flush()
}

func modelsCommand(fs *flag.FlagSet) runner {
	format := fs.String("format", "table", "output: table or json")
	return func(a *app, _ []string) error {
		if err := checkFormat("models", *format, "table", "json"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		ms, err := c.ListModels(a.ctx)
		if err != nil {
			return err
		}
		return a.modelTable(ms, *format)
	}
}

// modelTable lists models, one line each.
func (a *app) modelTable(ms []*mixdv1.Model, format string) error {
	if format == "json" {
		return writeJSONList(a.stdout, ms)
	}
	t := newTable(a.stdout, "MODEL", "VERSION", "FEATURES", "K", "FAMILY", "STRUCTURE", "FITTER", "ROWS", "CREATED")
	for _, m := range ms {
		p, r := m.GetParameters(), m.GetReport()
		fitter, rows := "-", "-"
		if r != nil {
			fitter = r.GetFitter()
			rows = strconv.FormatInt(r.GetTrainingRows(), 10)
		}
		t.row(m.GetName(), strconv.FormatInt(m.GetVersion(), 10), strconv.Itoa(int(p.GetDimension())),
			strconv.Itoa(len(p.GetComponents())), familyName(p.GetFamily()), structureName(p.GetCovarianceStructure()),
			fitter, rows, timeText(m.GetCreateTime()))
	}
	return t.flush()
}

func showCommand(fs *flag.FlagSet) runner {
	version := fs.Int64("version", 0, "version to show (default: the newest)")
	format := fs.String("format", "text", "output: text or json")
	return func(a *app, pos []string) error {
		if err := checkFormat("show", *format, "text", "json"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		m, err := c.GetModel(a.ctx, pos[0], *version)
		if err != nil {
			return err
		}
		return a.printModel(m, *format)
	}
}

func versionsCommand(fs *flag.FlagSet) runner {
	format := fs.String("format", "table", "output: table or json")
	return func(a *app, pos []string) error {
		if err := checkFormat("versions", *format, "table", "json"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		ms, err := c.ListVersions(a.ctx, pos[0])
		if err != nil {
			return err
		}
		return a.modelTable(ms, *format)
	}
}

func deleteCommand(fs *flag.FlagSet) runner {
	version := fs.Int64("version", 0, "version to delete (default: every version)")
	return func(a *app, pos []string) error {
		if *version < 0 {
			return usagef("delete: --version %d: want a positive version", *version)
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		n, err := c.DeleteModel(a.ctx, pos[0], *version)
		if err != nil {
			return err
		}
		fmt.Fprintf(a.stdout, "deleted %d version(s) of %s\n", n, pos[0])
		return nil
	}
}

func exportCommand(fs *flag.FlagSet) runner {
	version := fs.Int64("version", 0, "version to export (default: the newest)")
	output := fs.String("output", "-", "write the document to this `file` (default: standard output)")
	return func(a *app, pos []string) error {
		c, err := a.dial()
		if err != nil {
			return err
		}
		doc, err := c.ExportModel(a.ctx, pos[0], *version)
		if err != nil {
			return err
		}
		if len(doc) > 0 && doc[len(doc)-1] != '\n' {
			doc = append(doc, '\n')
		}
		if *output == "-" {
			if _, err := a.stdout.Write(doc); err != nil {
				return fmt.Errorf("write output: %w", err)
			}
			return nil
		}
		if err := os.WriteFile(*output, doc, 0o644); err != nil {
			return fmt.Errorf("write output: %w", err)
		}
		return nil
	}
}

func importCommand(fs *flag.FlagSet) runner {
	name := fs.String("name", "", "store under this model `id` instead of the document's")
	format := fs.String("format", "text", "output: text or json (the stored model)")
	return func(a *app, pos []string) error {
		if err := checkFormat("import", *format, "text", "json"); err != nil {
			return err
		}
		rc, src, err := a.openInput(pos[0])
		if err != nil {
			return err
		}
		doc, err := io.ReadAll(rc)
		rc.Close()
		if err != nil {
			return inputf("%s: %v", src, err)
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		m, err := c.ImportModel(a.ctx, doc, *name)
		if err != nil {
			return err
		}
		if *format == "json" {
			return writeJSON(a.stdout, m)
		}
		fmt.Fprintf(a.stdout, "imported %s version %d\n", m.GetName(), m.GetVersion())
		return nil
	}
}

func fittersCommand(fs *flag.FlagSet) runner {
	format := fs.String("format", "table", "output: table or json")
	return func(a *app, _ []string) error {
		if err := checkFormat("fitters", *format, "table", "json"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		list, err := c.ListFitters(a.ctx)
		if err != nil {
			return err
		}
		if *format == "json" {
			return writeJSONList(a.stdout, list)
		}
		t := newTable(a.stdout, "FITTER", "VERSION", "FAMILIES", "STRUCTURES", "SOURCE", "DESCRIPTION")
		for _, f := range list {
			var fams, structs []string
			for _, x := range f.GetFamilies() {
				fams = append(fams, familyName(x))
			}
			for _, x := range f.GetCovarianceStructures() {
				structs = append(structs, structureName(x))
			}
			t.row(f.GetName(), f.GetVersion(), strings.Join(fams, ","), strings.Join(structs, ","), f.GetSource(), f.GetDescription())
		}
		if err := t.flush(); err != nil {
			return err
		}
		for _, f := range list {
			if len(f.GetOptions()) == 0 {
				continue
			}
			fmt.Fprintf(a.stdout, "\noptions of %s (--option key=value):\n", f.GetName())
			ot := newTable(a.stdout, "  OPTION", "DEFAULT", "DESCRIPTION")
			for _, o := range f.GetOptions() {
				ot.row("  "+o.GetName(), o.GetDefaultValue(), o.GetDescription())
			}
			if err := ot.flush(); err != nil {
				return err
			}
		}
		return nil
	}
}
