package main_test

import (
	"testing"

	"go.uber.org/goleak"
)

// TestMain fails the package when a run leaves goroutines behind.
func TestMain(m *testing.M) { goleak.VerifyTestMain(m) }
