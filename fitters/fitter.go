// Package fitters is the contract between the mixd daemon and its estimators:
// the Fitter interface every estimation method implements, the settings and
// results that cross it, the typed errors a fitter returns, and the
// hashicorp/go-plugin glue (handshake, plugin map, gRPC adapters) that lets a
// fitter run as a separate process. Host and plugins both import this package.
package fitters

import (
	"context"
	"errors"
	"fmt"
	"time"

	"github.com/mixd-dev/mixd/fitters/mixture"
)

// Data is the training matrix handed to a fitter: Rows×Cols values, row-major,
// all finite. Weights, when non-nil, holds one non-negative weight per row.
type Data struct {
	Rows    int
	Cols    int
	Values  []float64
	Weights []float64
}

// Row returns row i of d as a slice into d.Values.
func (d Data) Row(i int) []float64 { return d.Values[i*d.Cols : (i+1)*d.Cols] }

// Criterion chooses among fits with different numbers of components.
type Criterion int

const (
	// BIC is the Bayesian information criterion, -2 log L + p log n; lower is better.
	BIC Criterion = iota + 1
	// AIC is Akaike's information criterion, -2 log L + 2p; lower is better.
	AIC
)

// String returns "bic" or "aic".
func (c Criterion) String() string {
	switch c {
	case BIC:
		return "bic"
	case AIC:
		return "aic"
	}
	return fmt.Sprintf("criterion(%d)", int(c))
}

// Settings are what a caller asks of a fit. Zero values mean "the fitter's
// documented default" unless stated otherwise.
type Settings struct {
	// Components is the number of components K. When MaxComponents > 0 the
	// fitter instead fits every K in [MinComponents, MaxComponents] and keeps
	// the one with the lowest Criterion; Components is then ignored.
	Components    int
	MinComponents int
	MaxComponents int
	Criterion     Criterion
	// Family and Structure of the model to estimate.
	Family    mixture.Family
	Structure mixture.Structure
	// Seed drives every random choice; the same data, settings and seed give a
	// bit-identical result.
	Seed uint64
	// MaxIterations caps iterations per restart; Tolerance is the convergence
	// threshold on the change of the objective per row.
	MaxIterations int
	Tolerance     float64
	// Restarts is the number of independent starts; the best is kept.
	Restarts int
	// Ridge is added to covariance diagonals; negative means "default".
	// Zero means no ridge at all.
	Ridge float64
	// Start, when non-nil, gives starting parameters instead of k-means++ seeding.
	Start *mixture.Params
	// Labels, when non-nil, gives a starting component (0..K-1) for every row.
	Labels []int
	// Options are method-specific settings, by name; a fitter rejects names it
	// does not know with an InvalidArgument error naming the option.
	Options map[string]string
}

// Progress is one event reported while a fit runs.
type Progress struct {
	// Components is the K being fitted, Restart the 0-based restart index.
	Components int
	Restart    int
	Iteration  int
	// Objective is the log-likelihood (EM, ECM) or the variational bound (VB).
	Objective float64
	Elapsed   time.Duration
}

// SelectionRow is one line of a model-selection table.
type SelectionRow struct {
	Components    int
	LogLikelihood float64
	BIC           float64
	AIC           float64
	Converged     bool
	Iterations    int
}

// Report describes how a fit went.
type Report struct {
	Iterations int
	Converged  bool
	// Objective names what History holds: "log_likelihood" or "variational_bound".
	Objective string
	// LogLikelihood is the final total (weighted) log-likelihood of the training rows.
	LogLikelihood float64
	// Bound is the final variational bound (VB only).
	Bound float64
	// BIC and AIC of the returned model on the training rows; lower is better.
	BIC float64
	AIC float64
	// History is the objective after each iteration of the winning restart.
	History []float64
	// Selection is the table of a fit over a range of K (empty otherwise).
	Selection []SelectionRow
	// FlaggedRows counts training rows flagged as outliers (Student-t fitters).
	FlaggedRows int
	// OutlierLevel is the tail probability level of the outlier rule used for
	// FlaggedRows (Student-t fitters); zero otherwise.
	OutlierLevel float64
	// EffectiveComponents counts components whose expected row count reaches
	// the fitter's threshold (variational fitters); zero when not reported.
	EffectiveComponents int
	// Notes are human-readable remarks, e.g. "component 3 collapsed at iteration
	// 12 and was re-seeded at row 881".
	Notes []string
	// Settings echoes the effective settings, defaults filled in, by name.
	Settings map[string]string
}

// Result is a finished fit.
type Result struct {
	Params mixture.Params
	Report Report
}

// OptionInfo documents one method-specific option.
type OptionInfo struct {
	Name        string
	Description string
	Default     string
}

// Info describes a fitter: its name, version and what it supports.
type Info struct {
	Name        string
	Version     string
	Description string
	Families    []mixture.Family
	Structures  []mixture.Structure
	Options     []OptionInfo
}

// Fitter estimates a mixture from data. Implementations must honour ctx
// (checking it at least once per iteration), report progress through the
// callback (which may be nil), never return NaN parameters, and return errors
// built with Errorf so the host can map them to gRPC codes.
type Fitter interface {
	Describe(ctx context.Context) (Info, error)
	Fit(ctx context.Context, data Data, settings Settings, progress func(Progress)) (*Result, error)
}

// Code classifies a fitter error.
type Code int

const (
	// Internal is a bug or an unexpected failure.
	Internal Code = iota
	// InvalidArgument: the data or settings are unusable; the message says which.
	InvalidArgument
	// FailedPrecondition: the request is well-formed but cannot be fitted
	// (for example fewer distinct rows than components).
	FailedPrecondition
	// Canceled: the context was cancelled.
	Canceled
	// DeadlineExceeded: the context's deadline passed.
	DeadlineExceeded
	// Unimplemented: the fitter does not support the requested family,
	// structure or option.
	Unimplemented
)

// Error is a fitter error carrying a Code.
type Error struct {
	Code Code
	Msg  string
	Err  error
}

// Error implements error.
func (e *Error) Error() string {
	if e.Err != nil {
		return e.Msg + ": " + e.Err.Error()
	}
	return e.Msg
}

// Unwrap returns the wrapped error, if any.
func (e *Error) Unwrap() error { return e.Err }

// Errorf builds an *Error with the given code.
func Errorf(code Code, format string, args ...any) error {
	return &Error{Code: code, Msg: fmt.Sprintf(format, args...)}
}

// CodeOf returns the Code of err: the code of the first *Error in its chain,
// Canceled or DeadlineExceeded for context errors, Internal otherwise.
func CodeOf(err error) Code {
	var fe *Error
	if errors.As(err, &fe) {
		return fe.Code
	}
	switch {
	case errors.Is(err, context.Canceled):
		return Canceled
	case errors.Is(err, context.DeadlineExceeded):
		return DeadlineExceeded
	}
	return Internal
}

// ContextError converts ctx.Err() into an *Error with the matching code, or
// returns nil when ctx is still live. Fitters call it once per iteration.
func ContextError(ctx context.Context) error {
	switch err := ctx.Err(); {
	case err == nil:
		return nil
	case errors.Is(err, context.DeadlineExceeded):
		return &Error{Code: DeadlineExceeded, Msg: "fit deadline exceeded", Err: err}
	default:
		return &Error{Code: Canceled, Msg: "fit cancelled", Err: err}
	}
}
