// Package conformance is the test suite every mixd fitter must pass, built in
// or a third party's. A fitter's own tests call it:
//
//	func TestConformance(t *testing.T) {
//		conformance.Run(t, func() fitters.Fitter { return myfitter.New() })
//	}
//
// The suite checks the contract of package fitters on data from a committed,
// seeded generator (two operating regimes of a pumping station: flow, motor
// current, vibration): a sane description; recovery of a well-separated
// two-component mixture with every supported covariance structure; choice of
// K over a range; bit-identical results for the same seed, also when fits
// run concurrently on one instance; prompt, correctly coded cancellation;
// errors with the right Code for bad input; Unimplemented for an unsupported
// family or structure; and, for every result, parameters that pass
// mixture.Params.Validate, weights summing to 1 and no NaN or infinity
// anywhere. The fitter must never modify the data it is given.
package conformance

import (
	"context"
	"fmt"
	"math"
	"regexp"
	"slices"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Run runs the suite as subtests of t. newFitter must return a ready fitter;
// it is called once per subtest (and once more for the determinism check, so
// that results are compared across instances).
func Run(t *testing.T, newFitter func() fitters.Fitter) {
	t.Helper()
	info, err := newFitter().Describe(context.Background())
	if err != nil {
		t.Fatalf("Describe: %v", err)
	}
	s := suite{newFitter: newFitter, info: info}
	t.Run("Describe", s.describe)
	if t.Failed() {
		return
	}
	s.family = pick(info.Families, mixture.Gaussian)
	s.structure = pick(info.Structures, mixture.Full)
	t.Run("RecoversSeparatedMixture", s.recovers)
	t.Run("EveryStructure", s.everyStructure)
	t.Run("ChoosesK", s.choosesK)
	t.Run("DeterministicBySeed", s.deterministic)
	t.Run("OtherSeeds", s.otherSeeds)
	t.Run("ConcurrentFits", s.concurrent)
	t.Run("Cancellation", s.cancellation)
	t.Run("BadInput", s.badInput)
	t.Run("Unsupported", s.unsupported)
}

type suite struct {
	newFitter func() fitters.Fitter
	info      fitters.Info
	family    mixture.Family
	structure mixture.Structure
}

// pick returns want when it is in have, else have[0].
func pick[T comparable](have []T, want T) T {
	if slices.Contains(have, want) {
		return want
	}
	return have[0]
}

// nameRE is the rule the mixd fitter host applies to fitter names.
var nameRE = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9._-]{0,63}$`)

func (s *suite) describe(t *testing.T) {
	in := s.info
	if !nameRE.MatchString(in.Name) {
		t.Errorf("name %q: want 1-64 letters, digits, '.', '_' or '-', starting with a letter or digit", in.Name)
	}
	if strings.TrimSpace(in.Version) == "" {
		t.Error("version is empty")
	}
	if strings.TrimSpace(in.Description) == "" {
		t.Error("description is empty")
	}
	if len(in.Families) == 0 {
		t.Error("no families")
	}
	for i, f := range in.Families {
		if f != mixture.Gaussian && f != mixture.StudentT {
			t.Errorf("families[%d] = %v is not a known family", i, f)
		}
		if slices.Index(in.Families, f) != i {
			t.Errorf("family %v listed twice", f)
		}
	}
	if len(in.Structures) == 0 {
		t.Error("no covariance structures")
	}
	for i, st := range in.Structures {
		if st < mixture.Full || st > mixture.Tied {
			t.Errorf("structures[%d] = %v is not a known structure", i, st)
		}
		if slices.Index(in.Structures, st) != i {
			t.Errorf("structure %v listed twice", st)
		}
	}
	seen := map[string]bool{}
	for i, o := range in.Options {
		if strings.TrimSpace(o.Name) == "" {
			t.Errorf("options[%d] has no name", i)
		}
		if seen[o.Name] {
			t.Errorf("option %q listed twice", o.Name)
		}
		seen[o.Name] = true
		if strings.TrimSpace(o.Description) == "" {
			t.Errorf("option %q has no description", o.Name)
		}
	}
	again, err := s.newFitter().Describe(context.Background())
	if err != nil {
		t.Fatalf("second Describe: %v", err)
	}
	if fmt.Sprint(again) != fmt.Sprint(in) {
		t.Errorf("Describe is not stable:\n%+v\n%+v", in, again)
	}
}

// settings returns K=2 settings for the suite's family and structure.
func (s *suite) settings(seed uint64) fitters.Settings {
	return fitters.Settings{Components: 2, Family: s.family, Structure: s.structure, Seed: seed, Ridge: -1}
}

func (s *suite) recovers(t *testing.T) {
	d, tr := generate(dataSeed, 600)
	orig := cloneData(d)
	st := s.settings(1)
	var events []fitters.Progress
	res, err := s.newFitter().Fit(context.Background(), d, st, func(p fitters.Progress) { events = append(events, p) })
	if err != nil {
		t.Fatalf("Fit: %v", err)
	}
	checkResult(t, res, d, st, 2)
	checkRecovery(t, res.Params, tr, s.family == mixture.Gaussian && s.structure == mixture.Full)
	checkUnchanged(t, d, orig)
	if len(events) == 0 {
		t.Error("no progress events")
	}
	type run struct{ k, restart int }
	last := map[run]int{}
	for i, p := range events {
		if p.Iteration < 0 || p.Restart < 0 || p.Components != 2 || !finite(p.Objective) || p.Elapsed < 0 {
			t.Errorf("progress event %d = %+v: want iteration ≥ 0, restart ≥ 0, components 2, finite objective", i, p)
			break
		}
		r := run{p.Components, p.Restart}
		if prev, ok := last[r]; ok && p.Iteration <= prev {
			t.Errorf("progress event %d = %+v: iteration does not increase within its restart (previous %d)", i, p, prev)
			break
		}
		last[r] = p.Iteration
	}
}

func (s *suite) everyStructure(t *testing.T) {
	d, tr := generate(dataSeed, 600)
	for _, structure := range s.info.Structures {
		t.Run(structure.String(), func(t *testing.T) {
			st := s.settings(2)
			st.Structure = structure
			res, err := s.newFitter().Fit(context.Background(), d, st, nil)
			if err != nil {
				t.Fatalf("Fit: %v", err)
			}
			checkResult(t, res, d, st, 2)
			checkRecovery(t, res.Params, tr, false)
		})
	}
}

func (s *suite) choosesK(t *testing.T) {
	d, tr := generate(dataSeed, 600)
	st := s.settings(3)
	st.Components, st.MinComponents, st.MaxComponents, st.Criterion = 0, 1, 3, fitters.BIC
	res, err := s.newFitter().Fit(context.Background(), d, st, nil)
	if err != nil {
		t.Fatalf("Fit over K=1..3: %v", err)
	}
	checkResult(t, res, d, st, 0)
	if k := len(res.Params.Components); k != 2 {
		t.Fatalf("chose K=%d for two well-separated groups, want 2", k)
	}
	checkRecovery(t, res.Params, tr, false)
	sel := res.Report.Selection
	if len(sel) != 3 {
		t.Fatalf("selection table has %d rows, want 3 (K=1..3)", len(sel))
	}
	best := 0
	for i, row := range sel {
		if row.Components != i+1 {
			t.Errorf("selection row %d is for K=%d, want %d", i, row.Components, i+1)
		}
		if row.BIC < sel[best].BIC {
			best = i
		}
	}
	if sel[best].Components != 2 {
		t.Errorf("lowest BIC in the selection table is at K=%d, but the result has K=2", sel[best].Components)
	}
}

func (s *suite) deterministic(t *testing.T) {
	d, _ := generate(dataSeed, 400)
	st := s.settings(42)
	a, err := s.newFitter().Fit(context.Background(), d, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := s.newFitter().Fit(context.Background(), d, st, nil)
	if err != nil {
		t.Fatal(err)
	}
	if err := sameResult(a, b); err != nil {
		t.Fatalf("two fits with the same data, settings and seed differ: %v", err)
	}
}

// otherSeeds: different seeds may give different results, but each must
// be a valid fit that finds the two groups.
func (s *suite) otherSeeds(t *testing.T) {
	d, tr := generate(dataSeed, 400)
	for _, seed := range []uint64{7, 1 << 40, math.MaxUint64} {
		st := s.settings(seed)
		st.Restarts = 1
		res, err := s.newFitter().Fit(context.Background(), d, st, nil)
		if err != nil {
			t.Fatalf("seed %d: %v", seed, err)
		}
		checkResult(t, res, d, st, 2)
		checkRecovery(t, res.Params, tr, false)
	}
}

// concurrent: the host sends concurrent fits to one plugin process, so one
// instance must handle them, with results identical to sequential ones.
func (s *suite) concurrent(t *testing.T) {
	d, _ := generate(dataSeed, 300)
	f := s.newFitter()
	want, err := f.Fit(context.Background(), d, s.settings(5), nil)
	if err != nil {
		t.Fatal(err)
	}
	const n = 3
	results := make([]*fitters.Result, n)
	errs := make([]error, n)
	var wg sync.WaitGroup
	for i := range n {
		wg.Add(1)
		go func() {
			defer wg.Done()
			results[i], errs[i] = f.Fit(context.Background(), d, s.settings(5), nil)
		}()
	}
	wg.Wait()
	for i := range n {
		if errs[i] != nil {
			t.Fatalf("concurrent fit %d: %v", i, errs[i])
		}
		if err := sameResult(want, results[i]); err != nil {
			t.Errorf("concurrent fit %d differs from the sequential one: %v", i, err)
		}
	}
}

func (s *suite) cancellation(t *testing.T) {
	d, _ := generate(dataSeed, 200)
	t.Run("AlreadyCancelled", func(t *testing.T) {
		ctx, cancel := context.WithCancel(context.Background())
		cancel()
		_, err := s.newFitter().Fit(ctx, d, s.settings(1), nil)
		if fitters.CodeOf(err) != fitters.Canceled {
			t.Errorf("error = %v (code %d), want code Canceled", err, fitters.CodeOf(err))
		}
	})
	t.Run("DeadlinePassed", func(t *testing.T) {
		ctx, cancel := context.WithDeadline(context.Background(), time.Now().Add(-time.Second))
		defer cancel()
		_, err := s.newFitter().Fit(ctx, d, s.settings(1), nil)
		if fitters.CodeOf(err) != fitters.DeadlineExceeded {
			t.Errorf("error = %v (code %d), want code DeadlineExceeded", err, fitters.CodeOf(err))
		}
	})
	t.Run("DuringFit", func(t *testing.T) {
		// A long fit: many components and restarts, a tolerance that is never
		// met. It is cancelled at its first progress event (or after 200 ms
		// if it reports none); a fitter that checks its context once per
		// iteration reports at most a few more events.
		big, _ := generate(dataSeed+1, 4000)
		st := s.settings(9)
		st.Components, st.Restarts, st.MaxIterations, st.Tolerance = 8, 50, 1_000_000, 1e-300
		ctx, cancel := context.WithCancel(context.Background())
		defer cancel()
		timer := time.AfterFunc(200*time.Millisecond, cancel)
		defer timer.Stop()
		var mu sync.Mutex
		before, after := 0, 0
		progress := func(fitters.Progress) {
			mu.Lock()
			defer mu.Unlock()
			if ctx.Err() != nil {
				after++
				return
			}
			before++
			cancel()
		}
		type outcome struct {
			res *fitters.Result
			err error
		}
		done := make(chan outcome, 1)
		go func() {
			res, err := s.newFitter().Fit(ctx, big, st, progress)
			done <- outcome{res, err}
		}()
		select {
		case o := <-done:
			if o.err == nil {
				t.Fatal("a cancelled fit returned a result")
			}
			if fitters.CodeOf(o.err) != fitters.Canceled {
				t.Fatalf("error = %v (code %d), want code Canceled", o.err, fitters.CodeOf(o.err))
			}
		case <-time.After(time.Minute):
			t.Fatal("the fit did not return within a minute of being cancelled")
		}
		mu.Lock()
		defer mu.Unlock()
		if after > 8 {
			t.Errorf("%d progress events after the cancellation: the context is not checked every iteration", after)
		}
	})
}

func (s *suite) badInput(t *testing.T) {
	good, _ := generate(dataSeed, 60)
	withValue := func(row, col int, v float64) fitters.Data {
		d := cloneData(good)
		d.Values[row*d.Cols+col] = v
		return d
	}
	withWeights := func(w []float64) fitters.Data {
		d := cloneData(good)
		d.Weights = w
		return d
	}
	weights := func(row int, v float64) []float64 {
		w := make([]float64, good.Rows)
		for i := range w {
			w[i] = 1
		}
		w[row] = v
		return w
	}
	set := func(f func(*fitters.Settings)) fitters.Settings {
		st := s.settings(1)
		f(&st)
		return st
	}
	tests := []struct {
		name string
		data fitters.Data
		st   fitters.Settings
		code fitters.Code
		// want lists alternatives; each alternative lists substrings that
		// must all appear in the message (case-insensitive).
		want [][]string
	}{
		{"no rows", fitters.Data{Rows: 0, Cols: 3}, s.settings(1), fitters.InvalidArgument, [][]string{{"row"}}},
		{"no columns", fitters.Data{Rows: 5, Cols: 0}, s.settings(1), fitters.InvalidArgument, nil},
		{"NaN", withValue(7, 2, math.NaN()), s.settings(1), fitters.InvalidArgument, [][]string{{"row 7", "column 2"}, {"row 7", "col 2"}}},
		{"infinity", withValue(0, 1, math.Inf(-1)), s.settings(1), fitters.InvalidArgument, [][]string{{"row 0", "column 1"}, {"row 0", "col 1"}}},
		{"values length", fitters.Data{Rows: good.Rows, Cols: 3, Values: good.Values[:len(good.Values)-1]}, s.settings(1), fitters.InvalidArgument, nil},
		{"negative weight", withWeights(weights(5, -1)), s.settings(1), fitters.InvalidArgument, [][]string{{"row 5"}}},
		{"NaN weight", withWeights(weights(3, math.NaN())), s.settings(1), fitters.InvalidArgument, [][]string{{"row 3"}}},
		{"weights length", withWeights(make([]float64, good.Rows-1)), s.settings(1), fitters.InvalidArgument, [][]string{{"weight"}}},
		{"K below 1", good, set(func(st *fitters.Settings) { st.Components = -1 }), fitters.InvalidArgument, [][]string{{"component"}}},
		{"range reversed", good, set(func(st *fitters.Settings) { st.Components, st.MinComponents, st.MaxComponents = 0, 3, 2 }), fitters.InvalidArgument, nil},
		{"unknown option", good, set(func(st *fitters.Settings) { st.Options = map[string]string{"no_such_option_q7": "1"} }), fitters.InvalidArgument, [][]string{{"no_such_option_q7"}}},
		{"unknown family", good, set(func(st *fitters.Settings) { st.Family = mixture.Family(99) }), fitters.InvalidArgument, nil},
		{"unknown structure", good, set(func(st *fitters.Settings) { st.Structure = mixture.Structure(99) }), fitters.InvalidArgument, nil},
		{"unknown criterion", good, set(func(st *fitters.Settings) {
			st.Components, st.MinComponents, st.MaxComponents, st.Criterion = 0, 1, 2, fitters.Criterion(9)
		}), fitters.InvalidArgument, nil},
		{"NaN tolerance", good, set(func(st *fitters.Settings) { st.Tolerance = math.NaN() }), fitters.InvalidArgument, [][]string{{"tolerance"}}},
		{"negative restarts", good, set(func(st *fitters.Settings) { st.Restarts = -2 }), fitters.InvalidArgument, [][]string{{"restart"}}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			orig := cloneData(tt.data)
			res, err := s.newFitter().Fit(context.Background(), tt.data, tt.st, nil)
			if err == nil {
				t.Fatalf("no error (result %+v)", res)
			}
			if c := fitters.CodeOf(err); c != tt.code {
				t.Errorf("error %q has code %d, want %d", err, c, tt.code)
			}
			if len(tt.want) > 0 && !matchesAny(err.Error(), tt.want) {
				t.Errorf("error %q does not name the problem (want one of %q)", err, tt.want)
			}
			checkUnchanged(t, tt.data, orig)
		})
	}
}

func matchesAny(msg string, alternatives [][]string) bool {
	msg = strings.ToLower(msg)
	for _, all := range alternatives {
		ok := true
		for _, sub := range all {
			ok = ok && strings.Contains(msg, strings.ToLower(sub))
		}
		if ok {
			return true
		}
	}
	return false
}

func (s *suite) unsupported(t *testing.T) {
	d, _ := generate(dataSeed, 60)
	for _, fam := range []mixture.Family{mixture.Gaussian, mixture.StudentT} {
		if slices.Contains(s.info.Families, fam) {
			continue
		}
		st := s.settings(1)
		st.Family = fam
		if _, err := s.newFitter().Fit(context.Background(), d, st, nil); fitters.CodeOf(err) != fitters.Unimplemented {
			t.Errorf("unsupported family %v: error = %v, want code Unimplemented", fam, err)
		}
	}
	for _, structure := range []mixture.Structure{mixture.Full, mixture.Diagonal, mixture.Spherical, mixture.Tied} {
		if slices.Contains(s.info.Structures, structure) {
			continue
		}
		st := s.settings(1)
		st.Structure = structure
		if _, err := s.newFitter().Fit(context.Background(), d, st, nil); fitters.CodeOf(err) != fitters.Unimplemented {
			t.Errorf("unsupported structure %v: error = %v, want code Unimplemented", structure, err)
		}
	}
}

// checkResult checks what every successful fit must satisfy. wantK > 0
// requires that many components.
func checkResult(t *testing.T, res *fitters.Result, d fitters.Data, st fitters.Settings, wantK int) {
	t.Helper()
	if res == nil {
		t.Fatal("nil result without an error")
	}
	p := res.Params
	if p.Dim != d.Cols {
		t.Fatalf("dimension %d for data with %d columns", p.Dim, d.Cols)
	}
	if st.Family != 0 && p.Family != st.Family {
		t.Errorf("family %v, requested %v", p.Family, st.Family)
	}
	if st.Structure != 0 && p.Structure != st.Structure {
		t.Errorf("structure %v, requested %v", p.Structure, st.Structure)
	}
	if wantK > 0 && len(p.Components) != wantK {
		t.Fatalf("%d components, requested %d", len(p.Components), wantK)
	}
	if err := noNonFinite(res); err != nil {
		t.Fatal(err)
	}
	var sum float64
	for k, c := range p.Components {
		if c.Weight < 0 || c.Weight > 1 {
			t.Errorf("component %d: weight %v outside [0, 1]", k, c.Weight)
		}
		sum += c.Weight
	}
	if math.Abs(sum-1) > 1e-9 {
		t.Errorf("weights sum to %.17g, want 1 (within 1e-9)", sum)
	}
	if err := p.Validate(); err != nil {
		t.Errorf("result fails mixture validation: %v", err)
	}
	switch res.Report.Objective {
	case "log_likelihood", "variational_bound":
	default:
		t.Errorf("report objective %q: want log_likelihood or variational_bound", res.Report.Objective)
	}
	if res.Report.Iterations < 0 {
		t.Errorf("report iterations %d is negative", res.Report.Iterations)
	}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// noNonFinite reports the first NaN or infinity in a result.
func noNonFinite(res *fitters.Result) error {
	for k, c := range res.Params.Components {
		named := map[string][]float64{"weight": {c.Weight}, "mean": c.Mean, "covariance": c.Cov, "degrees of freedom": {c.DF}}
		for name, vs := range named {
			for i, v := range vs {
				if !finite(v) {
					return fmt.Errorf("component %d: %s[%d] is %v", k, name, i, v)
				}
			}
		}
	}
	r := res.Report
	for name, v := range map[string]float64{"log-likelihood": r.LogLikelihood, "bound": r.Bound, "BIC": r.BIC, "AIC": r.AIC, "outlier level": r.OutlierLevel} {
		if !finite(v) {
			return fmt.Errorf("report %s is %v", name, v)
		}
	}
	for i, v := range r.History {
		if !finite(v) {
			return fmt.Errorf("report history[%d] is %v", i, v)
		}
	}
	for i, row := range r.Selection {
		if !finite(row.LogLikelihood) || !finite(row.BIC) || !finite(row.AIC) {
			return fmt.Errorf("report selection row %d has a non-finite value: %+v", i, row)
		}
	}
	return nil
}

// sameResult reports the first difference between two results, comparing
// numbers bit for bit.
func sameResult(a, b *fitters.Result) error {
	pa, pb := a.Params, b.Params
	if pa.Dim != pb.Dim || pa.Family != pb.Family || pa.Structure != pb.Structure || len(pa.Components) != len(pb.Components) {
		return fmt.Errorf("shapes differ: %d/%v/%v/K=%d vs %d/%v/%v/K=%d",
			pa.Dim, pa.Family, pa.Structure, len(pa.Components), pb.Dim, pb.Family, pb.Structure, len(pb.Components))
	}
	for k := range pa.Components {
		ca, cb := pa.Components[k], pb.Components[k]
		if err := sameBits(fmt.Sprintf("component %d weight", k), []float64{ca.Weight, ca.DF}, []float64{cb.Weight, cb.DF}); err != nil {
			return err
		}
		if err := sameBits(fmt.Sprintf("component %d mean", k), ca.Mean, cb.Mean); err != nil {
			return err
		}
		if err := sameBits(fmt.Sprintf("component %d covariance", k), ca.Cov, cb.Cov); err != nil {
			return err
		}
	}
	ra, rb := a.Report, b.Report
	if ra.Iterations != rb.Iterations || ra.Converged != rb.Converged {
		return fmt.Errorf("report: %d iterations (converged %v) vs %d (converged %v)", ra.Iterations, ra.Converged, rb.Iterations, rb.Converged)
	}
	if err := sameBits("report objective values", []float64{ra.LogLikelihood, ra.Bound, ra.BIC, ra.AIC}, []float64{rb.LogLikelihood, rb.Bound, rb.BIC, rb.AIC}); err != nil {
		return err
	}
	return sameBits("report history", ra.History, rb.History)
}

func sameBits(what string, a, b []float64) error {
	if len(a) != len(b) {
		return fmt.Errorf("%s: %d values vs %d", what, len(a), len(b))
	}
	for i := range a {
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return fmt.Errorf("%s[%d]: %v vs %v", what, i, a[i], b[i])
		}
	}
	return nil
}

func cloneData(d fitters.Data) fitters.Data {
	d.Values = slices.Clone(d.Values)
	d.Weights = slices.Clone(d.Weights)
	return d
}

func checkUnchanged(t *testing.T, d, orig fitters.Data) {
	t.Helper()
	if sameBits("data values", d.Values, orig.Values) != nil || sameBits("row weights", d.Weights, orig.Weights) != nil {
		t.Error("the fitter modified the data it was given")
	}
}
