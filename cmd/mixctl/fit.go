package main

import (
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"
	"time"

	mixdclient "github.com/mixd-dev/mixd/clients/go"
	mixdv1 "github.com/mixd-dev/mixd/proto/mixd/v1"
)

// optionFlag collects repeated --option key=value flags.
type optionFlag map[string]string

func (o optionFlag) String() string {
	var parts []string
	for k, v := range o {
		parts = append(parts, k+"="+v)
	}
	return strings.Join(parts, ",")
}

func (o optionFlag) Set(s string) error {
	k, v, ok := strings.Cut(s, "=")
	k = strings.TrimSpace(k)
	if !ok || k == "" {
		return fmt.Errorf("%q is not key=value", s)
	}
	if _, dup := o[k]; dup {
		return fmt.Errorf("option %q given twice", k)
	}
	o[k] = v
	return nil
}

// rangeFlag is a --components-range MIN:MAX value.
type rangeFlag struct{ lo, hi int }

func (r *rangeFlag) String() string {
	if r.hi == 0 {
		return ""
	}
	return fmt.Sprintf("%d:%d", r.lo, r.hi)
}

func (r *rangeFlag) Set(s string) error {
	a, b, ok := strings.Cut(s, ":")
	lo, err1 := strconv.Atoi(strings.TrimSpace(a))
	hi, err2 := strconv.Atoi(strings.TrimSpace(b))
	if !ok || err1 != nil || err2 != nil || lo < 1 || hi < lo {
		return fmt.Errorf("%q is not MIN:MAX with 1 <= MIN <= MAX", s)
	}
	r.lo, r.hi = lo, hi
	return nil
}

// floatFlag is an optional float flag: set records whether it was given.
type floatFlag struct {
	v   float64
	set bool
}

func (f *floatFlag) String() string {
	if !f.set {
		return ""
	}
	return formatFloat(f.v)
}

func (f *floatFlag) Set(s string) error {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return fmt.Errorf("%q is not a number", s)
	}
	f.v, f.set = v, true
	return nil
}

var (
	familyNames = map[string]mixdv1.Family{
		"gaussian":  mixdv1.Family_FAMILY_GAUSSIAN,
		"student_t": mixdv1.Family_FAMILY_STUDENT_T,
	}
	structureNames = map[string]mixdv1.CovarianceStructure{
		"full":      mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_FULL,
		"diagonal":  mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_DIAGONAL,
		"spherical": mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_SPHERICAL,
		"tied":      mixdv1.CovarianceStructure_COVARIANCE_STRUCTURE_TIED,
	}
	criterionNames = map[string]mixdv1.Criterion{
		"bic": mixdv1.Criterion_CRITERION_BIC,
		"aic": mixdv1.Criterion_CRITERION_AIC,
	}
)

// familyName and structureName are the inverse of the maps above.
func familyName(f mixdv1.Family) string {
	for k, v := range familyNames {
		if v == f {
			return k
		}
	}
	return strings.ToLower(strings.TrimPrefix(f.String(), "FAMILY_"))
}

func structureName(s mixdv1.CovarianceStructure) string {
	for k, v := range structureNames {
		if v == s {
			return k
		}
	}
	return strings.ToLower(strings.TrimPrefix(s.String(), "COVARIANCE_STRUCTURE_"))
}

// fitFlags are the flags of `mixctl fit`.
type fitFlags struct {
	model, fitter, criterion, structure, family, columns, format string
	components, maxIterations, restarts                          int
	seed                                                         uint64
	tolerance                                                    float64
	ridge                                                        floatFlag
	krange                                                       rangeFlag
	options                                                      optionFlag
	detach, quiet                                                bool
}

func fitCommand(fs *flag.FlagSet) runner {
	f := &fitFlags{options: optionFlag{}}
	fs.StringVar(&f.model, "model", "", "model id to write; a new version when it exists (required)")
	fs.StringVar(&f.fitter, "fitter", "", "fitter to use, see 'mixctl fitters' (default: the daemon's, em)")
	fs.IntVar(&f.components, "components", 0, "number of components K (this or --components-range is required)")
	fs.Var(&f.krange, "components-range", "fit every K in `MIN:MAX` and keep the best by --criterion")
	fs.StringVar(&f.criterion, "criterion", "", "how --components-range picks K: bic or aic (default bic)")
	fs.StringVar(&f.structure, "structure", "", "covariance structure: full, diagonal, spherical or tied (default full)")
	fs.StringVar(&f.family, "family", "", "component family: gaussian or student_t (default gaussian)")
	fs.Uint64Var(&f.seed, "seed", 0, "seed of every random choice; the same data, flags and seed give the same model")
	fs.IntVar(&f.maxIterations, "max-iterations", 0, "iteration cap per run (default: the fitter's)")
	fs.Float64Var(&f.tolerance, "tolerance", 0, "convergence tolerance (default: the fitter's)")
	fs.IntVar(&f.restarts, "restarts", 0, "independent starts, the best is kept (default: the fitter's)")
	fs.Var(&f.ridge, "ridge", "`amount` added to covariance diagonals (default: the fitter's)")
	fs.Var(f.options, "option", "fitter-specific `key=value` setting; repeat for several")
	fs.StringVar(&f.columns, "columns", "", "comma-separated `names` of the CSV columns to use (default: all)")
	fs.BoolVar(&f.detach, "detach", false, "start the fit as a job, print the job name and return")
	fs.BoolVar(&f.quiet, "quiet", false, "no progress on standard error")
	fs.StringVar(&f.format, "format", "text", "output: text or json (the stored model)")
	return func(a *app, pos []string) error { return a.fit(f, pos[0]) }
}

// options converts the flags into client options.
func (f *fitFlags) clientOptions(features []string) (mixdclient.FitOptions, error) {
	o := mixdclient.FitOptions{
		Fitter:        f.fitter,
		Components:    f.components,
		Seed:          f.seed,
		MaxIterations: f.maxIterations,
		Tolerance:     f.tolerance,
		Restarts:      f.restarts,
		FeatureNames:  features,
	}
	if len(f.options) > 0 {
		o.Options = f.options
	}
	if f.ridge.set {
		r := f.ridge.v
		o.Ridge = &r
	}
	if f.krange.hi == 0 && f.components <= 0 {
		return o, usagef("fit: give --components K or --components-range MIN:MAX")
	}
	if f.krange.hi > 0 {
		if f.components != 0 {
			return o, usagef("fit: give --components or --components-range, not both")
		}
		o.MinComponents, o.MaxComponents = f.krange.lo, f.krange.hi
	}
	if f.criterion != "" {
		c, ok := criterionNames[f.criterion]
		if !ok {
			return o, usagef("fit: --criterion %q: want bic or aic", f.criterion)
		}
		if f.krange.hi == 0 {
			return o, usagef("fit: --criterion needs --components-range")
		}
		o.Criterion = c
	}
	if f.structure != "" {
		s, ok := structureNames[f.structure]
		if !ok {
			return o, usagef("fit: --structure %q: want full, diagonal, spherical or tied", f.structure)
		}
		o.Structure = s
	}
	if f.family != "" {
		fam, ok := familyNames[f.family]
		if !ok {
			return o, usagef("fit: --family %q: want gaussian or student_t", f.family)
		}
		o.Family = fam
	}
	return o, nil
}

func (a *app) fit(f *fitFlags, path string) error {
	if f.model == "" {
		return usagef("fit: --model is required")
	}
	if f.format != "text" && f.format != "json" {
		return usagef("fit: --format %q: want text or json", f.format)
	}
	t, err := a.readTable(path)
	if err != nil {
		return err
	}
	if cols := splitList(f.columns); len(cols) > 0 {
		if t, err = t.selectColumns(cols); err != nil {
			return err
		}
	}
	if err := t.requireComplete("fit"); err != nil {
		return err
	}
	opts, err := f.clientOptions(t.header)
	if err != nil {
		return err
	}
	c, err := a.dial()
	if err != nil {
		return err
	}
	if f.detach {
		job, err := c.StartFit(a.ctx, f.model, t.data, opts)
		if err != nil {
			return err
		}
		fmt.Fprintln(a.stdout, job.GetName())
		return nil
	}
	p := newProgress(a.stderr, a.stderrIsTerminal, f.quiet, f.fitter)
	if !f.quiet {
		seen := false
		opts.OnJob = func(j *mixdv1.FitJob) {
			if seen {
				return // later events repeat the job on state changes
			}
			seen = true
			p.note(fmt.Sprintf("fitting %s as %s (%d rows × %d columns)", f.model, j.GetName(), t.data.Rows, t.data.Cols))
		}
	}
	model, err := c.Fit(a.ctx, f.model, t.data, opts, p.update)
	p.finish()
	if err != nil {
		return err
	}
	return a.printModel(model, f.format)
}

// progress prints fit progress to standard error: one line redrawn in place
// on a terminal, one line per event otherwise, nothing when quiet.
type progress struct {
	w         io.Writer
	tty       bool
	quiet     bool
	objective string
	drawn     bool
}

func newProgress(w io.Writer, tty, quiet bool, fitter string) *progress {
	obj := "log-likelihood"
	if fitter == "vb" {
		obj = "bound"
	}
	return &progress{w: w, tty: tty, quiet: quiet, objective: obj}
}

// line renders one event.
func (p *progress) line(ev *mixdv1.FitProgress) string {
	return fmt.Sprintf("components %d  restart %d  iteration %d  %s %.4f  elapsed %s",
		ev.GetComponents(), ev.GetRestart(), ev.GetIteration(), p.objective, ev.GetObjective(),
		ev.GetElapsed().AsDuration().Round(time.Millisecond))
}

// update shows one progress event.
func (p *progress) update(ev *mixdv1.FitProgress) {
	if p.quiet {
		return
	}
	if p.tty {
		// \r returns to the line start, ESC[K clears what a longer line left.
		fmt.Fprintf(p.w, "\r%s\x1b[K", p.line(ev))
		p.drawn = true
		return
	}
	fmt.Fprintln(p.w, p.line(ev))
}

// note prints a message on its own line.
func (p *progress) note(msg string) {
	if p.quiet {
		return
	}
	p.finish()
	fmt.Fprintln(p.w, msg)
}

// finish ends a redrawn line.
func (p *progress) finish() {
	if p.drawn {
		fmt.Fprintln(p.w)
		p.drawn = false
	}
}

// jobName accepts "fitJobs/x" or just "x".
func jobName(s string) string {
	if strings.HasPrefix(s, "fitJobs/") {
		return s
	}
	return "fitJobs/" + s
}

func jobsCommand(fs *flag.FlagSet) runner {
	format := fs.String("format", "table", "output: table or json")
	return func(a *app, _ []string) error {
		if err := checkFormat("jobs", *format, "table", "json"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		jobs, err := c.ListJobs(a.ctx)
		if err != nil {
			return err
		}
		if *format == "json" {
			return writeJSONList(a.stdout, jobs)
		}
		tw := newTable(a.stdout, "JOB", "MODEL", "FITTER", "STATE", "VERSION", "ROWS", "ITERATION", "CREATED")
		for _, j := range jobs {
			ver := ""
			if j.GetModelVersion() > 0 {
				ver = strconv.FormatInt(j.GetModelVersion(), 10)
			}
			tw.row(j.GetName(), j.GetModel(), j.GetFitter(), jobState(j.GetState()), ver,
				strconv.FormatInt(j.GetRows(), 10), strconv.Itoa(int(j.GetProgress().GetIteration())), timeText(j.GetCreateTime()))
		}
		return tw.flush()
	}
}

func jobCommand(fs *flag.FlagSet) runner {
	format := fs.String("format", "text", "output: text or json")
	return func(a *app, pos []string) error {
		if err := checkFormat("job", *format, "text", "json"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		job, _, err := c.GetJob(a.ctx, jobName(pos[0]))
		if err != nil {
			return err
		}
		if *format == "json" {
			return writeJSON(a.stdout, job)
		}
		return printJob(a.stdout, job)
	}
}

func watchCommand(fs *flag.FlagSet) runner {
	quiet := fs.Bool("quiet", false, "no progress on standard error")
	format := fs.String("format", "text", "output when the job succeeds: text or json (the stored model)")
	return func(a *app, pos []string) error {
		if err := checkFormat("watch", *format, "text", "json"); err != nil {
			return err
		}
		c, err := a.dial()
		if err != nil {
			return err
		}
		p := newProgress(a.stderr, a.stderrIsTerminal, *quiet, "")
		onJob := func(j *mixdv1.FitJob) {
			if p.objective != "bound" && j.GetFitter() == "vb" {
				p.objective = "bound"
			}
			p.note(fmt.Sprintf("%s: %s", j.GetName(), jobState(j.GetState())))
		}
		model, err := c.WatchJob(a.ctx, jobName(pos[0]), onJob, p.update)
		p.finish()
		if err != nil {
			return err
		}
		return a.printModel(model, *format)
	}
}

func cancelCommand(fs *flag.FlagSet) runner {
	return func(a *app, pos []string) error {
		c, err := a.dial()
		if err != nil {
			return err
		}
		job, err := c.CancelJob(a.ctx, jobName(pos[0]))
		if err != nil {
			return err
		}
		fmt.Fprintf(a.stdout, "%s: %s\n", job.GetName(), jobState(job.GetState()))
		return nil
	}
}

// jobState is a job state in lower case: "running", "succeeded", ...
func jobState(s mixdv1.FitJobState) string {
	return strings.ToLower(strings.TrimPrefix(s.String(), "FIT_JOB_STATE_"))
}

// printJob writes a job for people.
func printJob(w io.Writer, j *mixdv1.FitJob) error {
	kv := newKV(w)
	kv.add("job", j.GetName())
	kv.add("model", j.GetModel())
	kv.add("fitter", j.GetFitter())
	kv.add("state", jobState(j.GetState()))
	if j.GetModelVersion() > 0 {
		kv.add("version written", strconv.FormatInt(j.GetModelVersion(), 10))
	}
	kv.add("rows", strconv.FormatInt(j.GetRows(), 10))
	if p := j.GetProgress(); p != nil {
		kv.add("progress", fmt.Sprintf("components %d, restart %d, iteration %d, objective %.4f",
			p.GetComponents(), p.GetRestart(), p.GetIteration(), p.GetObjective()))
	}
	if j.GetErrorCode() != 0 || j.GetErrorMessage() != "" {
		kv.add("error", fmt.Sprintf("%s (code %d)", j.GetErrorMessage(), j.GetErrorCode()))
	}
	kv.add("created", timeText(j.GetCreateTime()))
	if j.GetEndTime() != nil {
		kv.add("ended", timeText(j.GetEndTime()))
	}
	return kv.flush()
}
