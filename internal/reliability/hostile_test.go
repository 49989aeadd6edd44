package reliability

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/hopwise/hopwise/graphidx"
)

// gridQueries writes n batch queries between random entities of a grid of
// size entities and returns the path.
func gridQueries(t testing.TB, dir string, n, size int) string {
	t.Helper()
	rng := rand.New(rand.NewPCG(5, 6))
	var b bytes.Buffer
	for i := range n {
		a, c := rng.IntN(size), rng.IntN(size)
		if a == c {
			c = (c + 1) % size
		}
		fmt.Fprintf(&b, `{"id":"q%d","from":"%s","value":"%s","to":"%s"}`+"\n", i, GridName(a), twoValues[i%2], GridName(c))
	}
	p := filepath.Join(dir, "q.jsonl")
	if err := os.WriteFile(p, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// watchPeakRSS polls the peak resident set (VmHWM in /proc/<pid>/status)
// of a running child every 20 ms; the returned function stops the polling
// and gives the last value in bytes, or -1 where /proc is unavailable. The
// child's rusage is no use here: on Linux an exec folds the parent's peak
// RSS into the child's ru_maxrss, so a large test process would be blamed
// on the child.
func watchPeakRSS(pid int) (stop func() int64) {
	path := fmt.Sprintf("/proc/%d/status", pid)
	var peak atomic.Int64
	peak.Store(-1)
	done := make(chan struct{})
	finished := make(chan struct{})
	go func() {
		defer close(finished)
		for {
			if b, err := os.ReadFile(path); err == nil {
				for _, l := range strings.Split(string(b), "\n") {
					var kb int64
					if _, err := fmt.Sscanf(l, "VmHWM: %d kB", &kb); err == nil && kb<<10 > peak.Load() {
						peak.Store(kb << 10)
					}
				}
			}
			select {
			case <-done:
				return
			case <-time.After(20 * time.Millisecond):
			}
		}
	}()
	return func() int64 { close(done); <-finished; return peak.Load() }
}

// wideLine is a JSONL presence context of n entities w-0, w-1, ...
func wideLine(id string, n int) string {
	ents := make([]string, n)
	for j := range ents {
		ents[j] = fmt.Sprintf(`"w-%d"`, j)
	}
	return fmt.Sprintf(`{"id":"%s","ents":[%s]}`, id, strings.Join(ents, ","))
}

// TestRouteSurvivesTruncatedIndex: truncating the index file under a
// running `hopwise route --queries` (the mistake of overwriting an index in
// place) fails the decisions in flight with an error naming the file and
// stops the batch with exit status 1 — no SIGBUS, no stack dump.
func TestRouteSurvivesTruncatedIndex(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("runs the binary on 400k queries")
	}
	dir := t.TempDir()
	idx := writeIndex(t, dir, "idx.hwx", GridSource(9000, 8, 3))
	queries := gridQueries(t, dir, 400_000, 9000)
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	cmd := exec.CommandContext(ctx, hopwiseBinary(t), "route", "--index", idx, "--queries", queries, "--cache-size", "0", "--workers", "2")
	stdout, err := cmd.StdoutPipe()
	if err != nil {
		t.Fatal(err)
	}
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	sc := bufio.NewScanner(stdout)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	lines, errLines := 0, 0
	for sc.Scan() {
		lines++
		if lines == 2000 {
			// Decisions are flowing: overwrite the index in place.
			if err := os.Truncate(idx, 4096); err != nil {
				t.Fatal(err)
			}
		}
		if strings.Contains(sc.Text(), `"error"`) {
			errLines++
		}
	}
	err = cmd.Wait()
	out := stderr.String()
	assertNoPanic(t, "route over a truncated index", out)
	if strings.Contains(out, "SIGBUS") || strings.Contains(out, "unexpected fault") {
		t.Fatalf("route died of the fault:\n%s", out)
	}
	code := -1
	if ee, ok := err.(*exec.ExitError); ok {
		code = ee.ExitCode()
	}
	if lines < 2000 {
		t.Fatalf("only %d output lines before the end (exit %v):\n%s", lines, err, out)
	}
	if lines == 400_000 && errLines == 0 {
		t.Skipf("route finished all queries before the truncation took effect")
	}
	if code != 1 || !strings.Contains(out, idx) || !strings.Contains(out, "changed while open") || errLines == 0 {
		t.Fatalf("exit %d, %d lines (%d errors); want exit 1, error lines, and stderr naming %s:\n%s", code, lines, errLines, idx, out)
	}
	t.Logf("%d lines written (%d errors) before route stopped: %s", lines, errLines, strings.TrimSpace(out))
}

// TestRouteBatchMemoryBounded: 160 query lines of ~1 MB each (a name far
// over the name limit) with --max-line-bytes 2 MiB are rejected before
// decoding and processed in chunks bounded by bytes: the route process's
// peak RSS stays under 150 MB (without the bounds: one 1,024-line chunk of
// decoded megabyte names, over 600 MB).
func TestRouteBatchMemoryBounded(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("writes a 160 MB query file")
	}
	dir := t.TempDir()
	idx := writeIndex(t, dir, "g.hwx", GridSource(200, 3, 1))
	p := filepath.Join(dir, "big.jsonl")
	f, err := os.Create(p)
	if err != nil {
		t.Fatal(err)
	}
	w := bufio.NewWriter(f)
	big := strings.Repeat("z", 1<<20)
	const n = 160
	for i := range n {
		fmt.Fprintf(w, `{"id":"q%d","from":"%s","value":"open","to":"zone-0001"}`+"\n", i, big)
	}
	if err := w.Flush(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	cmd := exec.Command(hopwiseBinary(t), "route", "--index", idx, "--queries", p, "--max-line-bytes", "2097152")
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	stop := watchPeakRSS(cmd.Process.Pid)
	err = cmd.Wait()
	peak := stop()
	if ee, ok := err.(*exec.ExitError); !ok || ee.ExitCode() != 2 {
		t.Fatalf("exit %v, want 2 (every line failed)\n%s", err, errb.String())
	}
	if got := strings.Count(out.String(), "longer than 4096 bytes"); got != n {
		t.Errorf("%d lines rejected for length, want %d", got, n)
	}
	if peak < 0 {
		t.Skip("no /proc on this platform")
	}
	if peak > 150<<20 {
		t.Errorf("route peak RSS %d MB for %d MB of input, want < 150 MB", peak>>20, n)
	}
	t.Logf("route peak RSS %d MB for %d lines of 1 MB", peak>>20, n)
}

// TestRouteBatchStrictKeys: keys are matched exactly and once; a lone
// surrogate is an error, not U+FFFD.
func TestRouteBatchStrictKeys(t *testing.T) {
	t.Parallel()
	idx := smallIndex(t)
	dir := t.TempDir()
	lines := []struct{ line, err string }{
		{`{"id":"a","from":"zone-0001","value":"open","to":"zone-0002"}`, ""},
		{`{"id":"b","from":"zzz","From":"zone-0001","value":"open","to":"zone-0002"}`, `key "From" differs from "from" only in case`},
		{`{"id":"c","from":"zzz","from":"zone-0001","value":"open","to":"zone-0002"}`, `field "from" appears twice`},
		{`{"ID":"d","from":"zone-0001","value":"open","to":"zone-0002"}`, `key "ID" differs from "id" only in case`},
		{`{"id":"e","from":"zone-0001\ud800","value":"open","to":"zone-0002"}`, "lone UTF-16 surrogate"},
		{`{"id":"f","from":"zone-0001","value":"open","to":"zone-0002","to":"zone-0003"}`, `field "to" appears twice`},
		{`{"id":"g","from":"` + strings.Repeat("x", graphidx.MaxNameBytes+1) + `","value":"open","to":"zone-0002"}`, "longer than 4096 bytes"},
		{`{"id":"h","from":"zone-0001","value":"open","to":"zone-0002","key":"\ud83c\udf31"}`, ""},
	}
	var in strings.Builder
	for _, l := range lines {
		in.WriteString(l.line + "\n")
	}
	p := filepath.Join(dir, "q.jsonl")
	if err := os.WriteFile(p, []byte(in.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, errOut := runCLI(t, "route", "--index", idx, "--queries", p, "--workers", "1")
	got := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if code != 2 || len(got) != len(lines) {
		t.Fatalf("exit %d, %d lines:\n%s%s", code, len(got), out, errOut)
	}
	for i, l := range lines {
		var obj struct{ Error string }
		if err := json.Unmarshal([]byte(got[i]), &obj); err != nil {
			t.Fatalf("line %d: %v", i+1, err)
		}
		if l.err == "" {
			if obj.Error != "" {
				t.Errorf("line %d: %s", i+1, got[i])
			}
			continue
		}
		if !strings.HasPrefix(obj.Error, fmt.Sprintf(`line %d: `, i+1)) || !strings.Contains(obj.Error, l.err) {
			t.Errorf("line %d: %s, want an error with %q", i+1, got[i], l.err)
		}
	}
}

// TestBuildKeepsIndexOnBadCorpus: `hopwise build` over random bytes, an
// empty file (also with --strict) or a wide context alone exits 2 and
// leaves the good index at --out byte-identical.
func TestBuildKeepsIndexOnBadCorpus(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	good := filepath.Join(dir, "good.jsonl")
	writeCorpus(t, good, 200, 30, 1)
	out := filepath.Join(dir, "prod.hwx")
	if code, o, e := runCLI(t, "build", "--corpus", good, "--out", out, "--quiet"); code != 0 {
		t.Fatalf("good build: exit %d\n%s%s", code, o, e)
	}
	want, _ := os.ReadFile(out)
	garbage := make([]byte, 1<<20)
	rng := rand.New(rand.NewPCG(3, 4))
	for i := range garbage {
		garbage[i] = byte(rng.Uint32())
	}
	wide := wideLine("w", graphidx.DefaultMaxContextEntities+1) + "\n"
	for _, tc := range []struct {
		name, data string
		args       []string
		want       string
	}{
		{"random", string(garbage), nil, "no valid context"},
		{"empty", "", nil, "no valid context"},
		{"empty strict", "", []string{"--strict"}, "no valid context"},
		{"wide", wide, nil, "too-many-entities"},
		{"wide strict", wide, []string{"--strict"}, "g.jsonl:1: ents: too-many-entities"},
	} {
		p := filepath.Join(dir, "g.jsonl")
		if err := os.WriteFile(p, []byte(tc.data), 0o644); err != nil {
			t.Fatal(err)
		}
		code, o, e := runCLI(t, append([]string{"build", "--corpus", p, "--out", out, "--quiet"}, tc.args...)...)
		if code != 2 || !strings.Contains(e, tc.want) {
			t.Errorf("%s: exit %d, want 2 and %q:\n%s%s", tc.name, code, tc.want, o, e)
		}
		if got, _ := os.ReadFile(out); !bytes.Equal(got, want) {
			t.Fatalf("%s: the good index was replaced", tc.name)
		}
	}
}

// TestBuildWideContextInterrupt: SIGINT reaches a build counting one wide
// context (20 000 entities, 200 M pairs, limit lifted): it exits within
// seconds with the previous --out untouched, its peak RSS within 1.5× the
// budget.
func TestBuildWideContextInterrupt(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("runs the binary on a wide context")
	}
	dir := t.TempDir()
	corpus := filepath.Join(dir, "w.jsonl")
	out := filepath.Join(dir, "w.hwx")
	if err := os.WriteFile(corpus, []byte(wideLine("w", 20000)+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(out, []byte("previous"), 0o644); err != nil {
		t.Fatal(err)
	}
	const budget = 64 << 20
	cmd := exec.Command(hopwiseBinary(t), "build", "--corpus", corpus, "--out", out, "--mem-budget", "64MiB",
		"--max-context-entities", "0", "--temp-dir", dir)
	var errb bytes.Buffer
	cmd.Stderr = &errb
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	stop := watchPeakRSS(cmd.Process.Pid)
	time.Sleep(1500 * time.Millisecond)
	sent := time.Now()
	if err := cmd.Process.Signal(os.Interrupt); err != nil {
		t.Fatal(err)
	}
	done := make(chan error, 1)
	go func() { done <- cmd.Wait() }()
	select {
	case <-done:
	case <-time.After(20 * time.Second):
		cmd.Process.Kill()
		<-done
		t.Fatalf("build ignored SIGINT for 20 s:\n%s", errb.String())
	}
	took := time.Since(sent)
	peak := stop()
	assertNoPanic(t, "interrupted build", errb.String())
	if got, _ := os.ReadFile(out); string(got) != "previous" {
		t.Errorf("interrupted build replaced --out")
	}
	if peak > budget*3/2 {
		t.Errorf("peak RSS %d MB, budget %d MB", peak>>20, budget>>20)
	}
	t.Logf("exited %v after SIGINT, peak RSS %d MB (budget %d MB)", took.Round(time.Millisecond), peak>>20, budget>>20)
	if left, _ := filepath.Glob(filepath.Join(dir, "hopwise-build-*")); len(left) > 0 {
		t.Errorf("spill directories left: %v", left)
	}
}
