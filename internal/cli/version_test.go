package cli

import (
	"bytes"
	"runtime"
	"runtime/debug"
	"strings"
	"testing"
)

func TestVersionLine(t *testing.T) {
	t.Parallel()
	vcs := []debug.BuildSetting{
		{Key: "vcs", Value: "git"},
		{Key: "vcs.revision", Value: "d614142abc"},
		{Key: "vcs.time", Value: "2026-12-04T18:00:00Z"},
		{Key: "vcs.modified", Value: "true"},
	}
	for _, c := range []struct {
		name string
		bi   *debug.BuildInfo
		ok   bool
		want string
	}{
		{"no build info", nil, false, "hopwise unknown go1.26 linux/amd64"},
		{"release", &debug.BuildInfo{Main: debug.Module{Version: "v1.2.3"}}, true, "hopwise v1.2.3 go1.26 linux/amd64"},
		{"checkout with vcs", &debug.BuildInfo{Main: debug.Module{Version: "(devel)"}, Settings: vcs}, true,
			"hopwise (devel) (revision d614142abc, 2026-12-04T18:00:00Z, modified) go1.26 linux/amd64"},
		{"clean tree", &debug.BuildInfo{Main: debug.Module{Version: "(devel)"}, Settings: vcs[:2]}, true,
			"hopwise (devel) (revision d614142abc) go1.26 linux/amd64"},
		{"empty main version", &debug.BuildInfo{}, true, "hopwise unknown go1.26 linux/amd64"},
	} {
		if got := versionLine(c.bi, c.ok, "go1.26", "linux/amd64"); got != c.want {
			t.Errorf("%s: got %q, want %q", c.name, got, c.want)
		}
	}
}

// TestVersionCommand runs `hopwise version` in the test binary, which has
// build information (its main module is the test's).
func TestVersionCommand(t *testing.T) {
	t.Parallel()
	root := NewRoot()
	var out bytes.Buffer
	root.SetOut(&out)
	root.SetArgs([]string{"version"})
	if err := root.Execute(); err != nil {
		t.Fatal(err)
	}
	s := out.String()
	if !strings.HasPrefix(s, "hopwise ") || !strings.Contains(s, runtime.Version()) || !strings.HasSuffix(s, runtime.GOOS+"/"+runtime.GOARCH+"\n") {
		t.Errorf("version output %q", s)
	}
	root = NewRoot()
	root.SetArgs([]string{"version", "extra"})
	root.SetOut(&out)
	root.SetErr(&out)
	if err := root.Execute(); err == nil {
		t.Error("version with an argument: no error")
	}
}
