package cli

import (
	"fmt"
	"runtime"
	"runtime/debug"
	"strings"

	"github.com/spf13/cobra"
)

func init() { register(newVersionCmd) }

func newVersionCmd() *cobra.Command {
	return &cobra.Command{
		Use:   "version",
		Short: "Print the module version, the source revision and the Go version of this binary",
		Long: `version prints the hopwise module version this binary was built from (a
release tag such as v1.2.3 when installed with "go install ...@version",
"(devel)" when built from a checkout), the version-control revision and time
and whether the working tree had local changes (when the Go toolchain
recorded them: builds inside a checkout do, "go run" and "go test" builds
may not), and the Go version and platform.`,
		Example: `  hopwise version
  go run ./cmd/hopwise version`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			bi, ok := debug.ReadBuildInfo()
			_, err := fmt.Fprintln(cmd.OutOrStdout(), versionLine(bi, ok, runtime.Version(), runtime.GOOS+"/"+runtime.GOARCH))
			return err
		},
	}
}

// versionLine formats the build information of the running binary:
// "hopwise VERSION (revision REV, TIME, modified) GO OS/ARCH". Parts the
// toolchain did not record are left out; without build information at all
// the version is "unknown".
func versionLine(bi *debug.BuildInfo, ok bool, goVersion, platform string) string {
	version := "unknown"
	var rev, when string
	modified := false
	if ok && bi != nil {
		if bi.Main.Version != "" {
			version = bi.Main.Version
		}
		for _, s := range bi.Settings {
			switch s.Key {
			case "vcs.revision":
				rev = s.Value
			case "vcs.time":
				when = s.Value
			case "vcs.modified":
				modified = s.Value == "true"
			}
		}
	}
	var vcs []string
	if rev != "" {
		vcs = append(vcs, "revision "+rev)
	}
	if when != "" {
		vcs = append(vcs, when)
	}
	if modified {
		vcs = append(vcs, "modified")
	}
	line := "hopwise " + version
	if len(vcs) > 0 {
		line += " (" + strings.Join(vcs, ", ") + ")"
	}
	return line + " " + goVersion + " " + platform
}
