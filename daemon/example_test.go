package daemon_test

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/mixd-dev/mixd/daemon"
)

// The limits a daemon applies when none are configured.
func ExampleDefaultLimits() {
	l := daemon.DefaultLimits()
	fmt.Println("rows per request:", l.MaxRows)
	fmt.Println("training values per fit:", l.MaxFitValues)
	fmt.Println("message bytes:", l.MaxMessageBytes)
	// Output:
	// rows per request: 1000000
	// training values per fit: 67108864
	// message bytes: 67108864
}

// Listen accepts TCP addresses and Unix socket paths; the returned address
// is what the daemon prints after daemon.ListeningPrefix.
func ExampleListen() {
	lis, addr, err := daemon.Listen("127.0.0.1:0")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer lis.Close()
	fmt.Println(strings.HasPrefix(addr, "127.0.0.1:"))

	dir, err := os.MkdirTemp("", "mixd-example")
	if err != nil {
		fmt.Println(err)
		return
	}
	defer os.RemoveAll(dir)
	sock := filepath.Join(dir, "mixd.sock")
	ulis, uaddr, err := daemon.Listen("unix:" + sock)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer ulis.Close()
	fi, _ := os.Stat(sock)
	fmt.Println(uaddr == "unix:"+sock, fi.Mode().Perm())
	// Output:
	// true
	// true -rw-------
}
