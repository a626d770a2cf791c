package daemon

import (
	"fmt"
)

// Limits bounds what one request may ask of the daemon. A request beyond a
// limit is rejected with RESOURCE_EXHAUSTED and a message naming the limit
// (and the serve flag that raises it); nothing is stored. Zero fields take
// the defaults of DefaultLimits.
type Limits struct {
	// MaxRows is the most rows one Score or Classify request (or one chunk of
	// their streaming variants) may carry, and the most rows Sample may return
	// in one response. Default 1 000 000.
	MaxRows int64
	// MaxDimension is the most columns (features) a model or a request may
	// have. Default 1024.
	MaxDimension int64
	// MaxComponents is the most components a fit may ask for (components or
	// components_max) or an imported model may have. Default 256.
	MaxComponents int64
	// MaxSampleCount is the most rows one SampleStream call may draw in all.
	// Default 100 000 000.
	MaxSampleCount int64
	// MaxFitRows is the most training rows one fit may upload. Default 10 000 000.
	MaxFitRows int64
	// MaxFitValues is the most training values (rows × columns) one fit may
	// upload; it bounds the memory a fit holds (8 bytes per value).
	// Default 67 108 864 (512 MiB of float64s; 1 000 000 × 32 fits).
	MaxFitValues int64
	// MaxActiveJobs is the most fit jobs that may be receiving, queued or
	// running at once. Default 16.
	MaxActiveJobs int
	// JobHistory is how many finished jobs are kept in memory for
	// GetFitJob/ListFitJobs; older finished jobs are forgotten. Default 1000.
	JobHistory int
	// MaxMessageBytes is the largest gRPC message the server receives or
	// sends. Responses that would exceed it are refused with
	// RESOURCE_EXHAUSTED naming the streaming call to use instead.
	// Default 64 MiB.
	MaxMessageBytes int
	// MaxFitMemory caps the estimated peak memory of one fit (see
	// EstimateFitBytes), checked as its rows arrive, before it starts.
	// Default 4 GiB.
	MaxFitMemory int64
}

// Default limit values; see the Limits fields.
const (
	DefaultMaxRows         = 1_000_000
	DefaultMaxDimension    = 1024
	DefaultMaxComponents   = 256
	DefaultMaxSampleCount  = 100_000_000
	DefaultMaxFitRows      = 10_000_000
	DefaultMaxFitValues    = 64 << 20
	DefaultMaxActiveJobs   = 16
	DefaultJobHistory      = 1000
	DefaultMaxMessageBytes = 64 << 20
	DefaultMaxFitMemory    = 4 << 30
)

// DefaultLimits returns the default limits.
func DefaultLimits() Limits {
	return Limits{}.withDefaults()
}

// withDefaults fills zero fields with their defaults.
func (l Limits) withDefaults() Limits {
	if l.MaxRows == 0 {
		l.MaxRows = DefaultMaxRows
	}
	if l.MaxDimension == 0 {
		l.MaxDimension = DefaultMaxDimension
	}
	if l.MaxComponents == 0 {
		l.MaxComponents = DefaultMaxComponents
	}
	if l.MaxSampleCount == 0 {
		l.MaxSampleCount = DefaultMaxSampleCount
	}
	if l.MaxFitRows == 0 {
		l.MaxFitRows = DefaultMaxFitRows
	}
	if l.MaxFitValues == 0 {
		l.MaxFitValues = DefaultMaxFitValues
	}
	if l.MaxActiveJobs == 0 {
		l.MaxActiveJobs = DefaultMaxActiveJobs
	}
	if l.JobHistory == 0 {
		l.JobHistory = DefaultJobHistory
	}
	if l.MaxMessageBytes == 0 {
		l.MaxMessageBytes = DefaultMaxMessageBytes
	}
	if l.MaxFitMemory == 0 {
		l.MaxFitMemory = DefaultMaxFitMemory
	}
	return l
}

// Validate reports the first limit that is negative (after defaults).
func (l Limits) Validate() error {
	l = l.withDefaults()
	for _, c := range []struct {
		name string
		v    int64
	}{
		{"max rows", l.MaxRows},
		{"max dimension", l.MaxDimension},
		{"max components", l.MaxComponents},
		{"max sample count", l.MaxSampleCount},
		{"max fit rows", l.MaxFitRows},
		{"max fit values", l.MaxFitValues},
		{"max active jobs", int64(l.MaxActiveJobs)},
		{"job history", int64(l.JobHistory)},
		{"max message bytes", int64(l.MaxMessageBytes)},
		{"max fit memory", l.MaxFitMemory},
	} {
		if c.v < 0 {
			return fmt.Errorf("limits: %s is %d, must be positive", c.name, c.v)
		}
	}
	if l.MaxMessageBytes < 1<<20 {
		return fmt.Errorf("limits: max message bytes is %d, must be at least 1 MiB", l.MaxMessageBytes)
	}
	return nil
}
