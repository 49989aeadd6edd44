package reliability

// Fuzz targets for the parsers not fuzzed in their own packages (and for
// Decide on arbitrary query strings): the router
// configuration, the route batch query lines (through the command line),
// the text-corpus lexicon, the single-line JSONL parser used by distributed
// builds, and gzip-compressed corpora. The other targets live beside their
// code (docs/GUARANTEES.md lists them all; scripts/fuzz-long.sh runs every
// one). Seeds are added with f.Add, so `go test` runs each target on them
// as a unit test.

import (
	"bytes"
	"compress/gzip"
	"context"
	"encoding/json"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"sync"
	"testing"
	"unicode/utf8"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/graphidx/corpus"
	"github.com/hopwise/hopwise/router"
)

// FuzzParseConfig: router.ParseConfig never panics; whatever it accepts
// validates, converts to options, and survives a SaveConfig/LoadConfig
// round trip unchanged.
func FuzzParseConfig(f *testing.F) {
	def, err := json.Marshal(router.DefaultConfig())
	if err != nil {
		f.Fatal(err)
	}
	f.Add(def)
	f.Add([]byte(`{}`))
	f.Add([]byte(`{"gain_threshold":0.002,"max_bridges":3,"beam":64,"error_model":"support","support_v0":0.25,"unknown_entity":"direct"}`))
	f.Add([]byte(`{"arms":[{"arm":"routed","weight":0.9},{"arm":"direct-only","weight":0.1}],"exploration":0.1,"exploration_salt":"s"}`))
	f.Add([]byte(`{"hash_key":"00112233445566778899aabbccddeeff","utility_lambda":1,"hop_cost":0.01}`))
	f.Add([]byte(`{"beam":0}`))
	f.Add([]byte(`{"gain_threshold":1e999}`))
	f.Add([]byte(`{"max_bridges":3} {"x":1}`))
	f.Add([]byte(`{"unknown":1}`))
	f.Add([]byte(`{"arms":[{"arm":"routed","weight":-1}]}`))
	f.Add([]byte(`{"exploration":0.5000001}`))
	f.Add([]byte(`{"cache_size":67108865}`))
	f.Add([]byte("\xef\xbb\xbf{}"))
	f.Add([]byte(`{"beam":3,"Beam":4,"arms":[{"arm":"routed","weight":1,"weight":0}]}`))
	dir := f.TempDir()
	var seq sync.Mutex
	n := 0
	f.Fuzz(func(t *testing.T, data []byte) {
		c, err := router.ParseConfig(bytes.NewReader(data), "fuzz.json")
		if err != nil {
			if !strings.Contains(err.Error(), "fuzz.json") {
				t.Fatalf("error does not name the input: %v", err)
			}
			return
		}
		if err := c.Validate(); err != nil {
			t.Fatalf("ParseConfig accepted what Validate rejects: %v", err)
		}
		if _, err := c.Options(); err != nil {
			t.Fatalf("ParseConfig accepted what Options rejects: %v", err)
		}
		seq.Lock()
		n++
		p := filepath.Join(dir, "c.json")
		seq.Unlock()
		if err := router.SaveConfig(p, c); err != nil {
			t.Fatalf("SaveConfig of an accepted config: %v", err)
		}
		back, err := router.LoadConfig(p)
		if err != nil {
			t.Fatalf("LoadConfig of a saved config: %v", err)
		}
		if !reflect.DeepEqual(normConfig(back), normConfig(c)) {
			t.Fatalf("round trip changed the config:\n%+v\n%+v", c, back)
		}
	})
}

// normConfig maps an empty arms slice to nil, which JSON cannot tell apart.
func normConfig(c router.Config) router.Config {
	if len(c.Arms) == 0 {
		c.Arms = nil
	}
	return c
}

var (
	fuzzIdxOnce sync.Once
	fuzzIdxPath string
	fuzzIdxErr  error
)

// smallIndex writes a small grid index once per process for the fuzz
// targets that need one.
func smallIndex(t testing.TB) string {
	t.Helper()
	fuzzIdxOnce.Do(func() {
		dir, err := osMkdirTemp("hopwise-fuzzidx-")
		if err != nil {
			fuzzIdxErr = err
			return
		}
		cleanupDirs = append(cleanupDirs, dir)
		fuzzIdxPath = filepath.Join(dir, "g.hwx")
		fuzzIdxErr = graphidx.WriteFile(fuzzIdxPath, GridSource(40, 2, 11))
	})
	if fuzzIdxErr != nil {
		t.Fatal(fuzzIdxErr)
	}
	return fuzzIdxPath
}

// FuzzRouteBatch feeds arbitrary query files to `hopwise route --queries`
// (the batch query line parser): it never panics, exits 0 (every line
// answered) or 2 (some lines failed), and writes exactly one JSON object per
// input line, an error object for each bad line.
func FuzzRouteBatch(f *testing.F) {
	f.Add([]byte(`{"id":"q1","from":"zone-0001","value":"open","to":"zone-0002"}` + "\n"))
	f.Add([]byte(`{"id":"q1","from":"zone-0001","value":"open","to":"zone-0002","key":"u7"}` + "\r\n" +
		`{"id":"q2","from":"zone-0003","value":"closed","to":"zone-0004"}`))
	f.Add([]byte("\n\n{}\n"))
	f.Add([]byte(`{"id":1,"from":"zone-0001","value":"open","to":"zone-0002"}` + "\n"))
	f.Add([]byte(`{"id":"q","from":"zone-0001","value":"open","to":"zone-0001"}` + "\n"))
	f.Add([]byte(`{"id":"q","from":"ghost","value":"open","to":"zone-0001","extra":true}` + "\n"))
	f.Add([]byte(`{"id":"q","from":"zone-0001","value":"ajar","to":"zone-0002"} trailing` + "\n"))
	f.Add([]byte(`[1,2,3]` + "\n" + `"str"` + "\n" + `null`))
	f.Add([]byte(`{"id":"\ud800","from":"zone-0001","value":"open","to":"zone-0002"}`))
	f.Add([]byte(strings.Repeat("x", 300) + "\n"))
	f.Add([]byte(`{"id":"q","from":"zzz","From":"zone-0001","value":"open","to":"zone-0002"}` + "\n" +
		`{"id":"q","id":"r","from":"zone-0001","value":"open","to":"zone-0002"}` + "\n"))
	idx := smallIndex(f)
	dir := f.TempDir()
	inputs := &fuzzFiles{dir: dir}
	f.Fuzz(func(t *testing.T, data []byte) {
		p := inputs.write(t, "q", ".jsonl", data)
		defer os.Remove(p)
		code, out, errOut := runCLI(t, "route", "--index", idx, "--queries", p, "--workers", "1", "--max-line-bytes", "256")
		assertNoPanic(t, "route --queries", out+errOut)
		if code != 0 && code != 2 {
			t.Fatalf("exit %d, want 0 or 2\n%s", code, errOut)
		}
		want := 0
		if len(data) > 0 {
			want = bytes.Count(data, []byte{'\n'})
			if data[len(data)-1] != '\n' {
				want++
			}
		}
		lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
		if out == "" {
			lines = nil
		}
		if len(lines) != want {
			t.Fatalf("%d output lines for %d input lines:\n%s", len(lines), want, out)
		}
		failed := 0
		for i, l := range lines {
			var obj map[string]any
			if err := json.Unmarshal([]byte(l), &obj); err != nil {
				t.Fatalf("output line %d is not JSON: %v\n%s", i+1, err, l)
			}
			if _, bad := obj["error"]; bad {
				failed++
			} else if obj["mode"] != "direct" && obj["mode"] != "chain" {
				t.Fatalf("output line %d has neither an error nor a mode: %s", i+1, l)
			}
		}
		if (failed > 0) != (code == 2) {
			t.Fatalf("exit %d with %d failed lines", code, failed)
		}
	})
}

func itoa(n int) string {
	var b [20]byte
	i := len(b)
	for {
		i--
		b[i] = byte('0' + n%10)
		n /= 10
		if n == 0 {
			return string(b[i:])
		}
	}
}

// FuzzParseLexicon: a lexicon either parses or fails with a *LineError
// naming the file; an accepted lexicon matches any text without panicking
// and returns sorted, distinct, non-empty entity ids.
func FuzzParseLexicon(f *testing.F) {
	f.Add([]byte("vent north\tvent-north\nVent N\tvent-north\n# comment\n\nbed 4\tbed-4\n"), []byte("The Vent North opened over bed 4."))
	f.Add([]byte("zone 2\tzone-2\nzone 2 vent\tvent-z2\n"), []byte("zone 2 vent, zone 2."))
	f.Add([]byte("a\tx\nA\ty\n"), []byte("a"))
	f.Add([]byte("\t\n"), []byte(""))
	f.Add([]byte("İ\ti-dot\nß\tsharp\n"), []byte("İß ı"))
	f.Add([]byte("\xff\tbad\n"), []byte("\xff"))
	f.Fuzz(func(t *testing.T, lex, text []byte) {
		l, err := graphidx.ParseLexicon(bytes.NewReader(lex), "lex.tsv")
		if err != nil {
			var le *graphidx.LineError
			if !errors.As(err, &le) || le.File != "lex.tsv" {
				t.Fatalf("lexicon error %v is not a *LineError naming the file", err)
			}
			return
		}
		ids := l.Match(text)
		if !slices.IsSorted(ids) {
			t.Fatalf("Match not sorted: %q", ids)
		}
		for i, id := range ids {
			if id == "" || (i > 0 && ids[i-1] == id) {
				t.Fatalf("Match returned an empty or repeated id: %q", ids)
			}
		}
	})
}

// FuzzJSONLLineParser: the single-line parser of distributed builds agrees
// with the streaming JSONLReader on every line (same context or same
// reason), and what it accepts satisfies the reader contract (non-empty
// valid UTF-8 names of at most MaxNameBytes, no repeated entity).
func FuzzJSONLLineParser(f *testing.F) {
	f.Add([]byte(`{"id":"c1","obs":{"vent3":"open","zone2.humidity":"high"}}`))
	f.Add([]byte(`{"id":"c2","ents":["pump1","bed4"]}`))
	f.Add([]byte(`{"id":"c3","obs":{"a":"1","a":"2"}}`))
	f.Add([]byte(`{"id":"c4","obs":{},"ents":[]}`))
	f.Add([]byte(`{"id":"","ents":["x"]}`))
	f.Add([]byte(`{"id":"c5","ents":["\ud800"]}` + "\r"))
	f.Add([]byte(`   `))
	f.Add([]byte(`{"id":"c6","obs":{"x":1}}`))
	f.Fuzz(func(t *testing.T, line []byte) {
		if bytes.ContainsAny(line, "\n") {
			return // the parser takes one line without its terminator
		}
		p := corpus.NewJSONLLineParser("f.jsonl", corpus.WithMaxLineBytes(512))
		c, blank, perr := p.Parse(line)
		r := corpus.NewJSONLReader(bytes.NewReader(append(append([]byte(nil), line...), '\n')), "f.jsonl",
			graphidx.WithPolicy(graphidx.Strict), corpus.WithMaxLineBytes(512))
		rc, rerr := r.Next()
		switch {
		case blank:
			if perr != nil || rerr != io.EOF {
				t.Fatalf("blank line: parser err %v, reader err %v", perr, rerr)
			}
			return
		case perr != nil:
			var pe, re *graphidx.LineError
			if !errors.As(perr, &pe) || !errors.As(rerr, &re) || pe.Reason != re.Reason {
				t.Fatalf("parser %v vs reader %v", perr, rerr)
			}
			return
		case rerr != nil:
			t.Fatalf("parser accepted, reader rejected: %v", rerr)
		}
		if c.ID != rc.ID || !reflect.DeepEqual(c.Obs, rc.Obs) {
			t.Fatalf("parser %+v vs reader %+v", c, rc)
		}
		if len(c.Obs) == 0 {
			t.Fatal("accepted an empty context")
		}
		seen := map[string]bool{}
		for _, o := range c.Obs {
			for _, s := range []string{o.Entity, o.Value} {
				if s == "" || !utf8.ValidString(s) || len(s) > graphidx.MaxNameBytes {
					t.Fatalf("accepted a bad name %q", s)
				}
			}
			if seen[o.Entity] {
				t.Fatalf("accepted a repeated entity %q", o.Entity)
			}
			seen[o.Entity] = true
		}
	})
}

// FuzzOpenCorpusGzip: a .jsonl.gz corpus of arbitrary bytes (usually not
// gzip at all, or a damaged stream) gives an error, never a panic; a valid
// stream reads the same contexts as the plain file.
func FuzzOpenCorpusGzip(f *testing.F) {
	gz := func(s string) []byte {
		var b bytes.Buffer
		w := gzip.NewWriter(&b)
		_, _ = w.Write([]byte(s))
		_ = w.Close()
		return b.Bytes()
	}
	good := gz(`{"id":"c1","obs":{"vent3":"open","pump1":"on"}}` + "\n" + `{"id":"c2","ents":["bed4"]}` + "\n")
	f.Add(good)
	f.Add(good[:len(good)/2])
	f.Add(append(append([]byte(nil), good...), good...)) // multistream
	f.Add([]byte("\x1f\x8b"))
	f.Add([]byte(`{"id":"c1","ents":["x"]}`))
	dir := f.TempDir()
	inputs := &fuzzFiles{dir: dir}
	f.Fuzz(func(t *testing.T, data []byte) {
		p := inputs.write(t, "c", ".jsonl.gz", data)
		defer os.Remove(p)
		r, closer, err := corpus.Open(p, "", "", corpus.WithMaxLineBytes(1<<12))
		if err != nil {
			return
		}
		defer closer.Close()
		for range 1 << 16 {
			_, err := r.Next()
			if err == io.EOF {
				return
			}
			if err != nil {
				if !strings.Contains(err.Error(), p) && !strings.Contains(err.Error(), filepath.Base(p)) {
					t.Fatalf("error does not name the file: %v", err)
				}
				return
			}
		}
	})
}

// FuzzDecide: Decide on arbitrary query strings never panics; it fails only
// with a documented sentinel, and a decision it returns is well formed
// (known mode, estimate a distribution over the target's values,
// propensity in (0, 1], finite errors).
func FuzzDecide(f *testing.F) {
	f.Add(GridName(1), "open", GridName(2), "")
	f.Add(GridName(3), "closed", GridName(3), "k")
	f.Add("ghost", "open", GridName(2), "unit-1")
	f.Add(GridName(1), "ajar", GridName(2), "")
	f.Add("", "", "", "\xff")
	f.Add(GridName(1)+"\x00", "open", GridName(2), "")
	x, err := graphidx.Open(smallIndex(f))
	if err != nil {
		f.Fatal(err)
	}
	plain, err := router.New(x, router.WithGainThreshold(-1))
	if err != nil {
		f.Fatal(err)
	}
	y, err := graphidx.Open(smallIndex(f))
	if err != nil {
		f.Fatal(err)
	}
	fallback, err := router.New(y, router.WithFallback(router.ModeChain),
		router.WithArms(router.ArmWeight{Arm: router.ArmRouted, Weight: 1}, router.ArmWeight{Arm: router.ArmChainAlways, Weight: 1}),
		router.WithExploration(0.2, "s"))
	if err != nil {
		f.Fatal(err)
	}
	f.Cleanup(func() { _ = plain.Close(); _ = fallback.Close() })
	f.Fuzz(func(t *testing.T, from, value, to, key string) {
		q := router.Query{From: from, Value: value, To: to, Key: key}
		for _, r := range []*router.Router{plain, fallback} {
			d, err := r.Decide(context.Background(), q)
			if err != nil {
				if !errors.Is(err, router.ErrUnknownEntity) && !errors.Is(err, router.ErrUnknownValue) && !errors.Is(err, router.ErrSameEntity) {
					t.Fatalf("%+v: undocumented error %v", q, err)
				}
				continue
			}
			if d.Mode != router.ModeDirect && d.Mode != router.ModeChain {
				t.Fatalf("mode %v", d.Mode)
			}
			if d.Propensity <= 0 || d.Propensity > 1 || math.IsNaN(d.Err) || math.IsInf(d.Err, 0) {
				t.Fatalf("%+v: propensity %v err %v", q, d.Propensity, d.Err)
			}
			if len(d.Estimate) > 0 {
				if len(d.Estimate) != len(d.Values) {
					t.Fatalf("%d estimates for %d values", len(d.Estimate), len(d.Values))
				}
				sum := 0.0
				for _, p := range d.Estimate {
					if p < 0 || p > 1 || math.IsNaN(p) {
						t.Fatalf("estimate %v", d.Estimate)
					}
					sum += p
				}
				if math.Abs(sum-1) > 1e-9 {
					t.Fatalf("estimate sums to %v", sum)
				}
			}
		}
	})
}

// fuzzFiles writes fuzz inputs to distinct files in dir (the fuzz function
// may run on several goroutines).
type fuzzFiles struct {
	dir string
	mu  sync.Mutex
	n   int
}

// write stores data as dir/<prefix><n><ext> and returns the path.
func (ff *fuzzFiles) write(t *testing.T, prefix, ext string, data []byte) string {
	ff.mu.Lock()
	ff.n++
	p := filepath.Join(ff.dir, prefix+itoa(ff.n)+ext)
	ff.mu.Unlock()
	if err := os.WriteFile(p, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}
