package fitterhost

import (
	"bufio"
	"bytes"
	"encoding/hex"
	"fmt"
	"os"
	"strings"
)

// Plugin manifest.
//
// With Config.Manifest set, an executable in the plugin directory is used
// only when the manifest pins its SHA-256 digest. The manifest is a text
// file of our own format, one pin per line:
//
//	# comment lines and blank lines are ignored
//	FILE sha256:HEX
//
// FILE is the executable's name inside the plugin directory (no '/'); HEX
// is the 64 hexadecimal digits of the SHA-256 of its content (for example
// from `sha256sum FILE`). A file may have several pins (any one matches),
// which lets an upgrade be pinned before it is copied in. An executable
// without a pin, or whose digest matches none of its pins, is refused: it is
// not started, not listed, a warning naming the file and both digests is
// logged, and Reload reports it among its problems. The manifest is read
// again by every Reload; one that cannot be read or parsed makes Reload
// fail and leaves the fitters as they were. Every launch of a pinned
// executable is checked again (go-plugin's SecureConfig), so an executable
// replaced after the scan is refused at launch.

// manifest maps file names to their allowed SHA-256 digests (lowercase
// hex).
type manifest map[string][]string

// parseManifest parses a manifest's contents; source names the file in
// errors, which also name the line.
func parseManifest(b []byte, source string) (manifest, error) {
	m := manifest{}
	sc := bufio.NewScanner(bytes.NewReader(b))
	n := 0
	for sc.Scan() {
		n++
		line := strings.TrimSpace(sc.Text())
		if line == "" || strings.HasPrefix(line, "#") {
			continue
		}
		f := strings.Fields(line)
		if len(f) != 2 {
			return nil, fmt.Errorf("%s line %d: want FILE sha256:HEX, found %d fields", source, n, len(f))
		}
		name, pin := f[0], f[1]
		if strings.ContainsRune(name, '/') || strings.HasPrefix(name, ".") {
			return nil, fmt.Errorf("%s line %d: %q is not a file name in the plugin directory (no '/', not starting with '.')", source, n, name)
		}
		h, ok := strings.CutPrefix(pin, "sha256:")
		if !ok {
			return nil, fmt.Errorf("%s line %d: the digest %q does not start with \"sha256:\"", source, n, pin)
		}
		if len(h) != 64 {
			return nil, fmt.Errorf("%s line %d: the SHA-256 digest has %d hex digits, want 64", source, n, len(h))
		}
		if _, err := hex.DecodeString(h); err != nil {
			return nil, fmt.Errorf("%s line %d: the SHA-256 digest is not hexadecimal: %v", source, n, err)
		}
		m[name] = append(m[name], strings.ToLower(h))
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s line %d: %w", source, n+1, err)
	}
	return m, nil
}

// loadManifest reads the manifest at path.
func loadManifest(path string) (manifest, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("fitter manifest: %w", err)
	}
	return parseManifest(b, "fitter manifest "+path)
}

// check reports why the executable called name with digest sum may not be
// used, or nil when a pin matches.
func (m manifest) check(name, sum string) error {
	pins, ok := m[name]
	if !ok {
		return fmt.Errorf("refused: %s is not pinned in the fitter manifest (its sha256 is %s)", name, sum)
	}
	for _, p := range pins {
		if p == sum {
			return nil
		}
	}
	return fmt.Errorf("refused: the sha256 of %s is %s, the fitter manifest pins %s", name, sum, strings.Join(pins, " or "))
}

// Hooks receive events of the host's plugin processes (for metrics). Any
// of them may be nil; they are called synchronously and must not block.
type Hooks struct {
	// Launched is called when a plugin process has started and connected.
	Launched func(fitter string)
	// LaunchFailed is called when a plugin process could not be started.
	LaunchFailed func(fitter string)
	// Lost is called when a process crashed, was killed or stopped answering
	// while a call used it.
	Lost func(fitter string)
	// Refused is called for an executable the manifest refuses.
	Refused func(path string)
}

func (h Hooks) launched(name string) {
	if h.Launched != nil {
		h.Launched(name)
	}
}

func (h Hooks) launchFailed(name string) {
	if h.LaunchFailed != nil {
		h.LaunchFailed(name)
	}
}

func (h Hooks) lost(name string) {
	if h.Lost != nil {
		h.Lost(name)
	}
}

func (h Hooks) refused(path string) {
	if h.Refused != nil {
		h.Refused(path)
	}
}
