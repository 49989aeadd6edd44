package reliability

import (
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"runtime"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"go.uber.org/goleak"

	"github.com/hopwise/hopwise/graphidx"
	"github.com/hopwise/hopwise/router"
)

// TestHotSwapUnderLoad is the concurrency promise: 16 goroutines decide
// while another goroutine hot-swaps the index every few milliseconds
// (freshly opened indexes of two different builds, alternately) and a third
// reconfigures the router. Checks: zero errors; every decision is computed
// on one of the two builds' generations; every retired index is closed
// exactly once, with a nil error, and the last is retired at Close; no
// goroutine leaks (goleak); and the process's mappings of both index files
// return to the baseline (zero) once the router is closed, i.e. every old
// mmap was released.
//
// Default: 16 × 3000 decisions (fast enough for go test ./...); with
// HOPWISE_STRESS=1: 16 × 100000. Run it under -race.
//
// Not parallel: goleak must see only this test's goroutines.
func TestHotSwapUnderLoad(t *testing.T) {
	defer goleak.VerifyNone(t, goleak.IgnoreCurrent())
	const workers = 16
	perWorker := 3000
	if stress() {
		perWorker = 100_000
	}
	const n = 400
	dir := t.TempDir()
	pathA := writeIndex(t, dir, "a.hwx", GridSource(n, 3, 1))
	pathB := writeIndex(t, dir, "b.hwx", GridSource(n, 3, 2))

	baseA, errA := MappedRegions(pathA)
	baseB, errB := MappedRegions(pathB)
	checkMaps := errA == nil && errB == nil
	if !checkMaps {
		t.Logf("mapping check skipped: %v %v", errA, errB)
	}

	open := func(p string) *graphidx.Index {
		x, err := graphidx.Open(p)
		if err != nil {
			t.Error(err)
			return nil
		}
		return x
	}
	first := open(pathA)
	if first == nil {
		t.FailNow()
	}
	gens := map[uint64]bool{first.Generation(): true}
	if x := open(pathB); x != nil {
		gens[x.Generation()] = true
		_ = x.Close()
	}
	if len(gens) != 2 {
		t.Fatalf("the two builds have the same generation")
	}

	var (
		mu      sync.Mutex
		retired = map[router.Graph]int{}
		badRet  []string
		opened  atomic.Int64
	)
	opened.Add(1)
	hook := func(old router.Graph, err error) {
		mu.Lock()
		defer mu.Unlock()
		retired[old]++
		if err != nil {
			badRet = append(badRet, err.Error())
		}
	}
	r, err := router.NewWithRetireHook(first, hook, router.WithCacheSize(4096), router.WithFallback(router.ModeDirect))
	if err != nil {
		t.Fatal(err)
	}

	ctx, stop := context.WithCancel(context.Background())
	var bg sync.WaitGroup
	var swaps, reconfs atomic.Int64
	bg.Add(2)
	go func() { // hot swap every ~2 ms
		defer bg.Done()
		paths := []string{pathB, pathA}
		for i := 0; ctx.Err() == nil; i++ {
			x, err := graphidx.Open(paths[i%2])
			if err != nil {
				t.Error(err)
				return
			}
			opened.Add(1)
			if err := r.Swap(x); err != nil {
				t.Error(err)
				return
			}
			swaps.Add(1)
			time.Sleep(2 * time.Millisecond)
		}
	}()
	go func() { // reconfigure every ~5 ms
		defer bg.Done()
		taus := []float64{0, 0.01, -0.01}
		for i := 0; ctx.Err() == nil; i++ {
			if err := r.Reconfigure(router.WithGainThreshold(taus[i%3]), router.WithBeam(8+i%3*8)); err != nil {
				t.Error(err)
				return
			}
			reconfs.Add(1)
			time.Sleep(5 * time.Millisecond)
		}
	}()

	var errs atomic.Int64
	var firstErr atomic.Value
	var wg sync.WaitGroup
	start := time.Now()
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			rng := rand.New(rand.NewPCG(uint64(w), 99))
			for range perWorker {
				a, b := rng.IntN(n), rng.IntN(n)
				if a == b {
					b = (b + 1) % n
				}
				q := router.Query{From: GridName(a), Value: twoValues[rng.IntN(2)], To: GridName(b)}
				d, err := r.Decide(context.Background(), q)
				if err == nil && !gens[d.Generation] {
					err = fmt.Errorf("decision on unknown generation %x", d.Generation)
				}
				if err != nil {
					if errs.Add(1) == 1 {
						firstErr.Store(fmt.Errorf("%+v: %w", q, err))
					}
				}
			}
		}()
	}
	wg.Wait()
	elapsed := time.Since(start)
	stop()
	bg.Wait()
	if err := r.Close(); err != nil {
		t.Fatal(err)
	}
	if _, err := r.Decide(context.Background(), router.Query{From: GridName(1), Value: "open", To: GridName(2)}); !errors.Is(err, router.ErrClosed) {
		t.Errorf("Decide after Close: %v, want ErrClosed", err)
	}
	if e := errs.Load(); e > 0 {
		t.Fatalf("%d of %d decisions failed; first: %v", e, workers*perWorker, firstErr.Load())
	}

	mu.Lock()
	nRetired := len(retired)
	for g, c := range retired {
		if c != 1 {
			t.Errorf("graph %p retired %d times", g, c)
		}
	}
	mu.Unlock()
	if int64(nRetired) != opened.Load() {
		t.Errorf("retired %d distinct indexes, opened %d: every index must be closed once", nRetired, opened.Load())
	}
	if len(badRet) > 0 {
		t.Errorf("Close errors on retire: %v", badRet)
	}
	if swaps.Load() < 3 || reconfs.Load() < 2 {
		t.Errorf("only %d swaps and %d reconfigurations happened during the run", swaps.Load(), reconfs.Load())
	}
	if checkMaps {
		runtime.GC()
		a, _ := MappedRegions(pathA)
		b, _ := MappedRegions(pathB)
		if a != baseA || b != baseB {
			t.Errorf("mappings of the index files after close: a=%d b=%d, want %d %d (old mmaps not released)", a, b, baseA, baseB)
		}
	}
	t.Logf("%d×%d decisions in %v (%.0f/s), %d swaps (%d indexes opened and retired), %d reconfigurations, 0 errors",
		workers, perWorker, elapsed.Round(time.Millisecond), float64(workers*perWorker)/elapsed.Seconds(),
		swaps.Load(), nRetired, reconfs.Load())
}

// TestMappedRegionsSeesIndex checks the mapping counter itself: an opened
// index appears in /proc/self/maps and disappears on Close. Without this,
// the release check of TestHotSwapUnderLoad could pass vacuously.
func TestMappedRegionsSeesIndex(t *testing.T) {
	t.Parallel()
	p := writeIndex(t, t.TempDir(), "m.hwx", GridSource(50, 2, 5))
	base, err := MappedRegions(p)
	if err != nil {
		t.Skip(err)
	}
	x, err := graphidx.Open(p)
	if err != nil {
		t.Fatal(err)
	}
	during, _ := MappedRegions(p)
	_ = x.Close()
	after, _ := MappedRegions(p)
	if during <= base || after != base {
		t.Fatalf("mappings before/during/after = %d/%d/%d, want during > before = after", base, during, after)
	}
}
