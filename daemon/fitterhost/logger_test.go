package fitterhost

import (
	"bytes"
	"log/slog"
	"strings"
	"testing"

	"github.com/hashicorp/go-hclog"
)

func TestHCLogAdapter(t *testing.T) {
	var buf bytes.Buffer
	l := newHCLogAdapter(slog.New(slog.NewTextHandler(&buf, &slog.HandlerOptions{Level: slog.LevelDebug})))
	if l.GetLevel() != hclog.Debug || l.IsTrace() || !l.IsDebug() {
		t.Errorf("level = %v, want Debug (the handler's)", l.GetLevel())
	}
	l.Named("host").Named("em").With("pid", 42).Warn("plugin process exited", "code", 2)
	l.Trace("dropped")
	l.Log(hclog.Off, "dropped too")
	l.ResetNamed("other").Error("boom")
	l.StandardLogger(nil).Print("from the standard logger")
	out := buf.String()
	for _, want := range []string{
		`level=WARN msg="plugin process exited" logger=host.em pid=42 code=2`,
		`level=ERROR msg=boom logger=other`,
		`level=INFO msg="from the standard logger"`,
	} {
		if !strings.Contains(out, want) {
			t.Errorf("log output lacks %q:\n%s", want, out)
		}
	}
	if strings.Contains(out, "dropped") {
		t.Errorf("filtered messages were logged:\n%s", out)
	}
	if got := l.Named("x").With("a", 1).ImpliedArgs(); len(got) != 2 || l.Named("x").Name() != "x" {
		t.Errorf("ImpliedArgs = %v, Name = %q", got, l.Named("x").Name())
	}
}
