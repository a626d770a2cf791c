package main

import (
	"context"
	"flag"
	"fmt"
	"log/slog"
	"os"
	"os/signal"
	"runtime/pprof"
	"syscall"

	"github.com/mixd-dev/mixd/daemon"
)

// runServe runs the daemon's serving code in this process (no fitters) on
// 127.0.0.1 port 0 until SIGINT or SIGTERM, writing a CPU profile of the
// whole run when asked: the way to profile the Score and Classify path
// under the load generator.
func runServe(args []string) (any, error) {
	fs := flag.NewFlagSet("serve", flag.ContinueOnError)
	dir := fs.String("data-dir", "", "model store folder (required)")
	cpu := fs.String("cpuprofile", "", "write a CPU profile here")
	if err := fs.Parse(args); err != nil {
		return nil, err
	}
	if *dir == "" {
		return nil, fmt.Errorf("-data-dir is required")
	}
	if *cpu != "" {
		f, err := os.Create(*cpu)
		if err != nil {
			return nil, err
		}
		defer f.Close()
		if err := pprof.StartCPUProfile(f); err != nil {
			return nil, err
		}
		defer pprof.StopCPUProfile()
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	cfg := daemon.Config{
		Listen:         "127.0.0.1:0",
		DataDir:        *dir,
		Logger:         slog.New(slog.NewTextHandler(os.Stderr, &slog.HandlerOptions{Level: slog.LevelInfo})),
		Status:         os.Stderr,
		DefaultTimeout: daemon.DefaultCallTimeout,
	}
	if err := daemon.Run(ctx, cfg); err != nil {
		return nil, err
	}
	return map[string]string{"stopped": "ok"}, nil
}
