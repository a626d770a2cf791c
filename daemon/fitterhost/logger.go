package fitterhost

import (
	"context"
	"io"
	"log"
	"log/slog"

	"github.com/hashicorp/go-hclog"
)

// hclogAdapter routes go-plugin's hclog output (including the log lines a
// plugin writes to its standard error, which go-plugin parses and re-logs)
// to a slog.Logger.
type hclogAdapter struct {
	l       *slog.Logger
	name    string
	implied []any
}

func newHCLogAdapter(l *slog.Logger) hclog.Logger { return &hclogAdapter{l: l} }

// levelTrace is the slog level used for hclog's Trace.
const levelTrace = slog.LevelDebug - 4

func toSlogLevel(level hclog.Level) slog.Level {
	switch level {
	case hclog.Trace:
		return levelTrace
	case hclog.Debug:
		return slog.LevelDebug
	case hclog.Warn:
		return slog.LevelWarn
	case hclog.Error:
		return slog.LevelError
	}
	return slog.LevelInfo
}

func (a *hclogAdapter) Log(level hclog.Level, msg string, args ...any) {
	if level == hclog.Off {
		return
	}
	all := make([]any, 0, 2+len(a.implied)+len(args))
	if a.name != "" {
		all = append(all, "logger", a.name)
	}
	all = append(all, a.implied...)
	all = append(all, args...)
	a.l.Log(context.Background(), toSlogLevel(level), msg, all...)
}

func (a *hclogAdapter) Trace(msg string, args ...any) { a.Log(hclog.Trace, msg, args...) }
func (a *hclogAdapter) Debug(msg string, args ...any) { a.Log(hclog.Debug, msg, args...) }
func (a *hclogAdapter) Info(msg string, args ...any)  { a.Log(hclog.Info, msg, args...) }
func (a *hclogAdapter) Warn(msg string, args ...any)  { a.Log(hclog.Warn, msg, args...) }
func (a *hclogAdapter) Error(msg string, args ...any) { a.Log(hclog.Error, msg, args...) }

func (a *hclogAdapter) enabled(l slog.Level) bool { return a.l.Enabled(context.Background(), l) }

func (a *hclogAdapter) IsTrace() bool { return a.enabled(levelTrace) }
func (a *hclogAdapter) IsDebug() bool { return a.enabled(slog.LevelDebug) }
func (a *hclogAdapter) IsInfo() bool  { return a.enabled(slog.LevelInfo) }
func (a *hclogAdapter) IsWarn() bool  { return a.enabled(slog.LevelWarn) }
func (a *hclogAdapter) IsError() bool { return a.enabled(slog.LevelError) }

func (a *hclogAdapter) ImpliedArgs() []any { return append([]any(nil), a.implied...) }

func (a *hclogAdapter) With(args ...any) hclog.Logger {
	b := *a
	b.implied = append(append([]any(nil), a.implied...), args...)
	return &b
}

func (a *hclogAdapter) Name() string { return a.name }

func (a *hclogAdapter) Named(name string) hclog.Logger {
	b := *a
	if b.name != "" {
		b.name += "." + name
	} else {
		b.name = name
	}
	return &b
}

func (a *hclogAdapter) ResetNamed(name string) hclog.Logger {
	b := *a
	b.name = name
	return &b
}

// SetLevel is ignored: the slog handler decides what is logged.
func (a *hclogAdapter) SetLevel(hclog.Level) {}

// GetLevel reports the most verbose level the slog handler accepts.
func (a *hclogAdapter) GetLevel() hclog.Level {
	switch {
	case a.IsTrace():
		return hclog.Trace
	case a.IsDebug():
		return hclog.Debug
	case a.IsInfo():
		return hclog.Info
	case a.IsWarn():
		return hclog.Warn
	case a.IsError():
		return hclog.Error
	}
	return hclog.Off
}

func (a *hclogAdapter) StandardLogger(*hclog.StandardLoggerOptions) *log.Logger {
	l := a.l
	if a.name != "" {
		l = l.With("logger", a.name)
	}
	return slog.NewLogLogger(l.Handler(), slog.LevelInfo)
}

func (a *hclogAdapter) StandardWriter(opts *hclog.StandardLoggerOptions) io.Writer {
	return a.StandardLogger(opts).Writer()
}

var _ hclog.Logger = (*hclogAdapter)(nil)
