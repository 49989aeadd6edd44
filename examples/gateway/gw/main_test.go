package gw_test

import (
	"fmt"
	"os"
	"testing"

	"go.uber.org/goleak"
)

var sharedDir string

// tempDirOutsideTest returns a directory that lives as long as the test
// binary (for the index the tests share); TestMain removes it.
func tempDirOutsideTest() (string, error) {
	if sharedDir == "" {
		d, err := os.MkdirTemp("", "gw-test-")
		if err != nil {
			return "", err
		}
		sharedDir = d
	}
	return sharedDir, nil
}

// TestMain fails the package when a test leaves goroutines behind (servers,
// exporters, index readers), and removes the shared index.
func TestMain(m *testing.M) {
	code := m.Run()
	if sharedDir != "" {
		os.RemoveAll(sharedDir)
	}
	if code == 0 {
		if err := goleak.Find(goleak.IgnoreTopFunction("net/http.(*persistConn).writeLoop"),
			goleak.IgnoreTopFunction("net/http.(*persistConn).readLoop"),
			goleak.IgnoreTopFunction("internal/poll.runtime_pollWait")); err != nil {
			fmt.Fprintln(os.Stderr, "goleak:", err)
			code = 1
		}
	}
	os.Exit(code)
}
