package reliability

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// corruptions returns damaged copies of a valid index file: single-byte
// flips at the start (magic), in the header, in the middle and in the last
// byte, and truncations to half and to all but one byte.
func corruptions(good []byte) map[string][]byte {
	flip := func(i int) []byte {
		b := append([]byte(nil), good...)
		b[i] ^= 0x5a
		return b
	}
	return map[string][]byte{
		"flip-magic":    flip(0),
		"flip-header":   flip(12),
		"flip-middle":   flip(len(good) / 2),
		"flip-last":     flip(len(good) - 1),
		"truncate-1":    append([]byte(nil), good[:len(good)-1]...),
		"truncate-half": append([]byte(nil), good[:len(good)/2]...),
	}
}

// TestCorruptIndexRejectedEndToEnd: an index file damaged after build is
// refused by Open with a corruption error, a router serving the previous
// index keeps serving it (the failed reload swaps nothing in), and the
// command line (route, inspect) exits non-zero with a message naming the
// file and the damage — never a panic.
func TestCorruptIndexRejectedEndToEnd(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	goodPath := writeIndex(t, dir, "good.hwx", GridSource(300, 3, 7))
	good, err := os.ReadFile(goodPath)
	if err != nil {
		t.Fatal(err)
	}
	ix, err := graphidx.Open(goodPath)
	if err != nil {
		t.Fatal(err)
	}
	r, err := router.New(ix)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	gen := r.Generation()
	q := router.Query{From: GridName(1), Value: "open", To: GridName(2)}
	before, err := r.Decide(context.Background(), q)
	if err != nil {
		t.Fatal(err)
	}

	for name, bad := range corruptions(good) {
		p := filepath.Join(dir, name+".hwx")
		if err := os.WriteFile(p, bad, 0o644); err != nil {
			t.Fatal(err)
		}
		// The reload path of a gateway: open, then swap only on success.
		for _, lazy := range []bool{false, true} {
			var opts []graphidx.OpenOption
			if lazy {
				opts = append(opts, graphidx.WithLazyVerify())
			}
			nx, err := graphidx.Open(p, opts...)
			if err == nil {
				// A lazy open only checks the header and section table; a
				// damaged section must then fail Verify.
				verr := nx.Verify()
				_ = nx.Close()
				if !lazy || !graphidx.IsCorruption(verr) {
					t.Fatalf("%s (lazy=%v): Open accepted a damaged file (Verify: %v)", name, lazy, verr)
				}
				continue
			}
			if !graphidx.IsCorruption(err) {
				t.Fatalf("%s (lazy=%v): Open error %v is not IsCorruption", name, lazy, err)
			}
			if !strings.Contains(err.Error(), p) {
				t.Errorf("%s: error %q does not name the file", name, err)
			}
		}
		after, err := r.Decide(context.Background(), q)
		if err != nil || r.Generation() != gen || after.Generation != before.Generation {
			t.Fatalf("%s: router changed after a failed reload: gen %x→%x, err %v", name, gen, r.Generation(), err)
		}

		// Command line: non-zero exit, clear message, no panic.
		for _, args := range [][]string{
			{"route", "--index", p, "--from", GridName(1), "--value", "open", "--to", GridName(2)},
			{"inspect", "--index", p},
			{"inspect", "--index", p, "--verify"},
		} {
			code, out, errOut := runCLI(t, args...)
			all := out + errOut
			assertNoPanic(t, strings.Join(args, " "), all)
			if code == 0 && len(args) == 3 && strings.Contains(out, "header only") && !strings.HasPrefix(name, "flip-magic") && !strings.HasPrefix(name, "flip-header") && !strings.HasPrefix(name, "truncate") {
				// Plain inspect opens lazily (header and section table,
				// O(1)) and says so; a damaged section is only caught
				// with --verify, which is checked next.
				continue
			}
			if code == 0 {
				t.Errorf("hopwise %s on %s: exit 0, want non-zero\n%s", args[0], name, all)
				continue
			}
			if !strings.Contains(all, p) || !strings.Contains(errOut, "graphidx:") {
				t.Errorf("hopwise %s on %s: message does not name the file and the damage:\n%s", args[0], name, all)
			}
		}
	}
}

// TestCorruptIndexBinary runs the built binary on a damaged index, so a
// crash of the real process (not only a returned error) would be caught.
func TestCorruptIndexBinary(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("builds the hopwise binary")
	}
	dir := t.TempDir()
	p := writeIndex(t, dir, "x.hwx", GridSource(100, 2, 3))
	b, err := os.ReadFile(p)
	if err != nil {
		t.Fatal(err)
	}
	b[len(b)/3] ^= 0xff
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	for _, args := range [][]string{
		{"route", "--index", p, "--from", GridName(1), "--value", "open", "--to", GridName(2)},
		{"inspect", "--index", p, "--verify"},
	} {
		code, out := runBinary(t, 2*time.Minute, args...)
		assertNoPanic(t, args[0], out)
		if code == 0 || !strings.Contains(out, "hopwise:") || !strings.Contains(out, p) {
			t.Errorf("hopwise %s: exit %d, want non-zero with a message naming %s:\n%s", args[0], code, p, out)
		}
	}
}
