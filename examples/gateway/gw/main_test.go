package gw_test

import (
	"testing"

	"go.uber.org/goleak"
)

// TestMain fails the package when a test leaves goroutines behind (servers,
// exporters, index readers).
func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }
