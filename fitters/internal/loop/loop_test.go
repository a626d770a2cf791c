package loop

import (
	"context"
	"errors"
	"math"
	"reflect"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/mixd-dev/mixd/fitters"
	"github.com/mixd-dev/mixd/fitters/mixture"
)

// TestParallel: every chunk runs once, on a worker in range, and with one
// worker in chunk order on the calling goroutine.
func TestParallel(t *testing.T) {
	for _, workers := range []int{0, 1, 2, 7} {
		const n = 100
		var mu sync.Mutex
		var order []int
		seen := make([]int, n)
		Parallel(workers, n, func(w, c int) {
			if w < 0 || w >= max(workers, 1) {
				t.Errorf("worker %d of %d", w, workers)
			}
			mu.Lock()
			seen[c]++
			order = append(order, c)
			mu.Unlock()
		})
		for c, k := range seen {
			if k != 1 {
				t.Fatalf("workers %d: chunk %d ran %d times", workers, c, k)
			}
		}
		if workers <= 1 {
			for i, c := range order {
				if c != i {
					t.Fatalf("workers %d: order %v", workers, order)
				}
			}
		}
	}
}

func TestAddTo(t *testing.T) {
	dst := []float64{1, 2}
	AddTo(dst, []float64{10, 20, 30})
	if !reflect.DeepEqual(dst, []float64{11, 22}) {
		t.Fatalf("got %v", dst)
	}
}

// TestRestarts: the first of the best objectives wins; an error or a
// cancelled context stops the restarts.
func TestRestarts(t *testing.T) {
	objs := []float64{-3, -1, -2, -1}
	var ran []int
	best, idx, err := Restarts(context.Background(), len(objs), func(r int) (string, float64, error) {
		ran = append(ran, r)
		return string(rune('a' + r)), objs[r], nil
	})
	if err != nil || best != "b" || idx != 1 || !reflect.DeepEqual(ran, []int{0, 1, 2, 3}) {
		t.Fatalf("best %q index %d ran %v, %v", best, idx, ran, err)
	}
	boom := errors.New("boom")
	if _, _, err := Restarts(context.Background(), 3, func(r int) (int, float64, error) { return 0, 0, boom }); !errors.Is(err, boom) {
		t.Fatalf("error %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	calls := 0
	_, _, err = Restarts(ctx, 3, func(r int) (int, float64, error) { calls++; cancel(); return r, 0, nil })
	if fitters.CodeOf(err) != fitters.Canceled || calls != 1 {
		t.Fatalf("error %v after %d calls", err, calls)
	}
}

type fit struct {
	Outcome
	k int
}

func TestChooseK(t *testing.T) {
	bic := map[int]float64{1: 30, 2: 10, 3: 10, 4: 12}
	aic := map[int]float64{1: 40, 2: 9, 3: 8, 4: 12}
	run := func(k int) (fit, error) {
		return fit{Outcome{LogLik: -float64(k), BIC: bic[k], AIC: aic[k], Converged: k != 4, Iterations: 10 * k}, k}, nil
	}
	best, table, err := ChooseK(1, 4, true, fitters.BIC, run)
	if err != nil || best.k != 2 || len(table) != 4 { // tie at 10: the first wins
		t.Fatalf("best K=%d table %v, %v", best.k, table, err)
	}
	if want := (fitters.SelectionRow{Components: 4, LogLikelihood: -4, BIC: 12, AIC: 12, Converged: false, Iterations: 40}); table[3] != want {
		t.Fatalf("row %+v, want %+v", table[3], want)
	}
	best, table, err = ChooseK(1, 4, false, fitters.AIC, run)
	if err != nil || best.k != 3 || table != nil {
		t.Fatalf("best K=%d table %v, %v", best.k, table, err)
	}
	boom := errors.New("boom")
	if _, _, err := ChooseK(1, 2, true, fitters.BIC, func(k int) (fit, error) { return fit{}, boom }); !errors.Is(err, boom) {
		t.Fatalf("error %v", err)
	}
	rep := best.Report("log_likelihood", []float64{-5, -3}, nil)
	if rep.Iterations != 30 || !rep.Converged || rep.LogLikelihood != -3 || rep.BIC != 10 || rep.AIC != 8 || rep.Objective != "log_likelihood" || len(rep.History) != 2 {
		t.Fatalf("report %+v", rep)
	}
}

func TestEndNotes(t *testing.T) {
	if got := EndNotes(0, 1, "bound", 5, 10, true); got != nil {
		t.Fatalf("notes %q", got)
	}
	want := []string{"restart 2 of 3 gave the highest log-likelihood", "stopped after 10 iterations without meeting the tolerance"}
	if got := EndNotes(1, 3, "log-likelihood", 10, 10, false); !reflect.DeepEqual(got, want) {
		t.Fatalf("notes %q", got)
	}
	if got := EndNotes(0, 1, "bound", 0, 0, false); got != nil { // evaluating the start is not stopping early
		t.Fatalf("notes %q", got)
	}
}

// TestClimb runs the loop on a sequence of log-likelihoods that halves its
// gap to 0 each iteration.
func TestClimb(t *testing.T) {
	var events []fitters.Progress
	c := Climb{Who: "demo", MaxIter: 100, TolAbs: 0.01, Scale: 2, K: 3, Restart: 1, Began: time.Now(),
		Progress: func(p fitters.Progress) { events = append(events, p) }}
	ll := -8.0
	var updates []int
	tr, err := c.Run(context.Background(), func() float64 { return ll }, func(it int) bool {
		updates = append(updates, it)
		ll /= 2
		return it != 2 // the step to iteration 2 re-seeded: no convergence check against it
	})
	if err != nil {
		t.Fatal(err)
	}
	// ll: −8, −4, −2, −1, −0.5, ..., −1/128; steps of 1/128 ≤ 0.01 first
	// between −1/64 and −1/128, after 10 updates.
	if !tr.Converged || tr.Iterations != 10 || len(tr.History) != 11 || tr.History[0] != -16 || tr.History[10] != -2.0/128 {
		t.Fatalf("trace %+v", tr)
	}
	if !reflect.DeepEqual(updates, []int{1, 2, 3, 4, 5, 6, 7, 8, 9, 10}) || len(events) != 11 || events[4].Iteration != 4 || events[4].Objective != -1 || events[4].Components != 3 || events[4].Restart != 1 {
		t.Fatalf("updates %v events %+v", updates, events)
	}

	c.MaxIter = 0
	tr, err = c.Run(context.Background(), func() float64 { return -1 }, func(int) bool { t.Fatal("updated with MaxIter 0"); return true })
	if err != nil || tr.Iterations != 0 || tr.Converged || len(tr.History) != 1 {
		t.Fatalf("trace %+v, %v", tr, err)
	}

	c.MaxIter = 3
	tr, err = c.Run(context.Background(), func() float64 { return -1 }, func(int) bool { return false })
	if err != nil || tr.Iterations != 3 || tr.Converged {
		t.Fatalf("never checkable: trace %+v, %v", tr, err)
	}

	_, err = c.Run(context.Background(), func() float64 { return math.NaN() }, func(int) bool { return true })
	if err == nil || fitters.CodeOf(err) != fitters.Internal || err.Error() != "demo: log-likelihood is NaN at iteration 0 (K=3, restart 1)" {
		t.Fatalf("error %v", err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := c.Run(ctx, func() float64 { return -1 }, func(int) bool { return true }); fitters.CodeOf(err) != fitters.Canceled {
		t.Fatalf("cancelled: %v", err)
	}
}

func TestLogLikelihood(t *testing.T) {
	m, err := mixture.New(mixture.Params{Dim: 1, Family: mixture.Gaussian, Structure: mixture.Full,
		Components: []mixture.Component{{Weight: 1, Mean: []float64{0}, Cov: []float64{1}}}})
	if err != nil {
		t.Fatal(err)
	}
	// log N(0 | 0, 1) = −½ log 2π (common practice).
	ll, err := LogLikelihood(m, []float64{0}, nil, "demo", "the model")
	if err != nil || math.Abs(ll+0.5*math.Log(2*math.Pi)) > 1e-15 {
		t.Fatalf("ll %v, %v", ll, err)
	}
	_, err = LogLikelihood(m, []float64{0, 1}, []float64{1}, "demo", "the model")
	if err == nil || fitters.CodeOf(err) != fitters.Internal || !strings.HasPrefix(err.Error(), "demo: log-likelihood of the model: ") {
		t.Fatalf("error %v", err)
	}
}
