package fitters

import (
	"os"
	"runtime"
	"strconv"
	"time"

	"github.com/hashicorp/go-hclog"
	"github.com/hashicorp/go-plugin"
)

// Serve runs f as a fitter plugin and returns when the host ends the plugin.
// It is what a plugin's main function calls (the mixd binary calls it for
// `mixd fitter <name>`). It speaks gRPC only and never writes to standard
// output, which carries go-plugin's handshake line; logs go to standard error
// as JSON lines that the host's go-plugin client forwards to its own logger.
//
// A plugin must not outlive its host. On Linux, Serve first asks the kernel
// to send the process SIGKILL when its parent dies (PR_SET_PDEATHSIG). That
// setting belongs to the calling thread, so Serve keeps its goroutine locked
// to that thread until it returns. On every platform it also polls its parent
// process id and exits (status 3) as soon as it changes, and it exits at once
// when the host named in ParentPIDEnv is already gone.
//
// Started by hand (without the handshake cookie in the environment) it prints
// an explanation to standard error and exits with status 1.
func Serve(f Fitter) {
	logger := hclog.New(&hclog.LoggerOptions{
		Name:       "fitter",
		Output:     os.Stderr, // the real stderr: go-plugin replaces os.Stderr later
		JSONFormat: true,
		Level:      hclog.Info,
	})
	if os.Getenv(Handshake.MagicCookieKey) == Handshake.MagicCookieValue {
		// The parent-death signal is a property of this thread: keep the
		// thread alive (and this goroutine on it) while serving.
		runtime.LockOSThread()
		defer runtime.UnlockOSThread()
		watchParent(logger, parentFromEnv(), parentPollInterval, true)
	}
	plugin.Serve(&plugin.ServeConfig{
		HandshakeConfig: Handshake,
		Plugins:         PluginSet(f),
		GRPCServer:      newGRPCServer,
		Logger:          logger,
	})
}

// parentPollInterval is how often a plugin checks that its host is alive.
const parentPollInterval = 250 * time.Millisecond

// parentFromEnv returns the host's process id from ParentPIDEnv, or 0.
func parentFromEnv() int {
	pid, err := strconv.Atoi(os.Getenv(ParentPIDEnv))
	if err != nil || pid <= 0 {
		return 0
	}
	return pid
}

// watchParent arranges for the process to exit when its parent dies: with
// deathSignal it requests the parent-death signal for the calling thread where
// the platform has one; it exits at once if the host named by hostPID (when
// non-zero) is already gone; and it starts a goroutine that exits the process
// with status 3 when the parent process id changes.
func watchParent(logger hclog.Logger, hostPID int, every time.Duration, deathSignal bool) {
	if deathSignal {
		if err := setParentDeathSignal(); err != nil {
			logger.Warn("cannot request the parent-death signal; relying on polling", "error", err)
		}
	}
	parent := os.Getppid()
	if hostPID != 0 && hostPID != parent && !processAlive(hostPID) {
		logger.Error("host process is already gone; exiting", "host_pid", hostPID)
		os.Exit(3)
	}
	go func() {
		t := time.NewTicker(every)
		defer t.Stop()
		for range t.C {
			if os.Getppid() != parent {
				logger.Error("host process exited; exiting", "host_pid", parent)
				os.Exit(3)
			}
		}
	}()
}
