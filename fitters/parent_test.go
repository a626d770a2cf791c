package fitters_test

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"runtime"
	"strconv"
	"syscall"
	"testing"
	"time"

	"github.com/hashicorp/go-hclog"
	"golang.org/x/sys/unix"

	"github.com/mixd-dev/mixd/fitters"
)

// modeEnv selects a helper role for the test binary (see TestMain).
const modeEnv = "MIXD_FITTERS_TEST_MODE"

// TestMain lets the test binary play helper processes for the parent-watch
// tests:
//
//	watch-child  polls its parent (no parent-death signal), writes its pid
//	             to $PIDFILE (when set) once watching, and sleeps
//	watch-middle starts a watch-child and sleeps
func TestMain(m *testing.M) {
	switch os.Getenv(modeEnv) {
	case "watch-child":
		host, _ := strconv.Atoi(os.Getenv(fitters.ParentPIDEnv))
		fitters.WatchParent(hclog.NewNullLogger(), host, 20*time.Millisecond, false)
		if path := os.Getenv("PIDFILE"); path != "" { // watching now
			_ = os.WriteFile(path+".tmp", []byte(strconv.Itoa(os.Getpid())), 0o644)
			_ = os.Rename(path+".tmp", path)
		}
		time.Sleep(time.Minute)
		os.Exit(0)
	case "watch-middle":
		child := exec.Command(os.Args[0])
		// As a host does, name this process as the child's host: the child may
		// only start watching after this process is already gone.
		child.Env = append(os.Environ(), modeEnv+"=watch-child", fitters.ParentPIDEnv+"="+strconv.Itoa(os.Getpid()))
		if err := child.Start(); err != nil {
			fmt.Fprintln(os.Stderr, err)
			os.Exit(1)
		}
		time.Sleep(time.Minute)
		os.Exit(0)
	}
	os.Exit(m.Run())
}

// becomeSubreaper makes orphaned descendants of this process its children,
// so a test can collect their exit status.
func becomeSubreaper(t *testing.T) {
	t.Helper()
	if runtime.GOOS != "linux" {
		t.Skip("needs PR_SET_CHILD_SUBREAPER")
	}
	if err := unix.Prctl(unix.PR_SET_CHILD_SUBREAPER, 1, 0, 0, 0); err != nil {
		t.Skipf("PR_SET_CHILD_SUBREAPER: %v", err)
	}
	t.Cleanup(func() { _ = unix.Prctl(unix.PR_SET_CHILD_SUBREAPER, 0, 0, 0, 0) })
}

// waitStatus reaps pid, killing it if it has not exited within the wait.
func waitStatus(t *testing.T, pid int) syscall.WaitStatus {
	t.Helper()
	type result struct {
		ws  syscall.WaitStatus
		err error
	}
	done := make(chan result, 1)
	go func() {
		var ws syscall.WaitStatus
		_, err := syscall.Wait4(pid, &ws, 0, nil)
		done <- result{ws, err}
	}()
	select {
	case r := <-done:
		if r.err != nil {
			t.Fatalf("wait4(%d): %v", pid, r.err)
		}
		return r.ws
	case <-time.After(15 * time.Second):
		_ = syscall.Kill(pid, syscall.SIGKILL)
		<-done
		t.Fatalf("process %d did not exit after its parent died", pid)
		return 0
	}
}

// TestPollingNoticesParentDeath checks the fallback for platforms without a
// parent-death signal: the watcher exits the process with status 3 when its
// parent dies.
func TestPollingNoticesParentDeath(t *testing.T) {
	becomeSubreaper(t)
	pidfile := filepath.Join(t.TempDir(), "child.pid")
	middle := exec.Command(os.Args[0])
	middle.Env = append(os.Environ(), modeEnv+"=watch-middle", "PIDFILE="+pidfile)
	if err := middle.Start(); err != nil {
		t.Fatal(err)
	}
	var child int
	deadline := time.Now().Add(15 * time.Second)
	for {
		b, err := os.ReadFile(pidfile)
		if err == nil {
			child, _ = strconv.Atoi(string(b))
			break
		}
		if time.Now().After(deadline) {
			_ = middle.Process.Kill()
			_ = middle.Wait()
			t.Fatal("the middle process never started its child")
		}
		time.Sleep(10 * time.Millisecond)
	}
	_ = middle.Process.Kill()
	_ = middle.Wait()
	ws := waitStatus(t, child)
	if !ws.Exited() || ws.ExitStatus() != 3 {
		t.Fatalf("child ended with %v, want exit status 3 from the parent watch", ws)
	}
}

// TestExitsWhenHostAlreadyGone checks that a plugin whose host died before it
// started exits at once.
func TestExitsWhenHostAlreadyGone(t *testing.T) {
	if runtime.GOOS != "linux" {
		t.Skip("process liveness check is Linux-only")
	}
	gone := exec.Command("/bin/true")
	if err := gone.Run(); err != nil {
		t.Skip(err)
	}
	child := exec.Command(os.Args[0])
	child.Env = append(os.Environ(), modeEnv+"=watch-child", "PIDFILE=", fitters.ParentPIDEnv+"="+strconv.Itoa(gone.Process.Pid))
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	ws := waitStatus(t, child.Process.Pid)
	if !ws.Exited() || ws.ExitStatus() != 3 {
		t.Fatalf("child ended with %v, want exit status 3", ws)
	}
}
