package graphidx

import "testing"

func TestFormatSize(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		n    int64
		want string
	}{
		{512 << 20, "512MiB"}, {64 << 20, "64MiB"}, {2 << 30, "2GiB"}, {1536 << 20, "1536MiB"},
		{500e6, "500MB"}, {4096, "4KiB"}, {1000, "1kB"}, {1023, "1023 bytes"}, {0, "0 bytes"},
	} {
		if got := formatSize(c.n); got != c.want {
			t.Errorf("formatSize(%d) = %q, want %q", c.n, got, c.want)
		}
	}
}
