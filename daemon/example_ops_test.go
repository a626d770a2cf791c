package daemon_test

import (
	"fmt"

	"github.com/mixd-dev/mixd/daemon"
)

// A token file with a full token for deployments and a read token for
// dashboards.
func ExampleParseTokens() {
	file := []byte(`# CLASS TOKEN [LABEL]
full 4b1d2c0e9f7a5e3c8d6b1a0f2e4c6a8b deployer
read 7e5c3a1f9d8b6e4c2a0f1e3d5c7b9a8f dashboards
`)
	tokens, err := daemon.ParseTokens(file, "tokens")
	fmt.Println(tokens.Len(), err)
	_, err = daemon.ParseTokens([]byte("admin 4b1d2c0e9f7a5e3c8d6b1a0f2e4c6a8b\n"), "tokens")
	fmt.Println(err)
	// Output:
	// 2 <nil>
	// tokens line 1: token class "admin" is not "read" or "full"
}

// The memory --max-fit-memory is compared with: a fit of 200 000 readings
// of flow, motor current and vibration with up to 6 components:
// 8 × (3·200000·3 + 2·200000 + 2·200000·6 + 3·6·3²) bytes = 35.1 MiB, plus
// the 32 MiB of the fitter process.
func ExampleEstimateFitBytes() {
	b := daemon.EstimateFitBytes(200_000, 3, 6)
	fmt.Printf("%.1f MiB\n", float64(b)/(1<<20))
	// Output: 67.1 MiB
}
