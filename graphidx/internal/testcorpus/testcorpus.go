package testcorpus

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"testing"
	"time"
)

// JSONL returns n JSONL contexts of exactly 8 entities each, drawn
// from a window of 48 entities around a random centre on a ring of ents
// greenhouse sensors (locality: far-apart sensors never co-occur), each
// with one of 3 states. Seeded, so every run measures the same bytes.
func JSONL(n, ents int, seed uint64) []byte {
	rng := rand.New(rand.NewPCG(seed, 11))
	states := []string{"low", "ok", "high"}
	var b bytes.Buffer
	picked := make([]int, 0, 8)
	for i := range n {
		picked = Window(rng, picked, rng.IntN(ents), 48, ents, 8)
		fmt.Fprintf(&b, `{"id":"ctx%d","obs":{`, i)
		for j, e := range picked {
			if j > 0 {
				b.WriteByte(',')
			}
			fmt.Fprintf(&b, `"bed%d.sensor%d":"%s"`, e/16, e%16, states[(e+rng.IntN(2))%3])
		}
		b.WriteString("}}\n")
	}
	return b.Bytes()
}

// Window sets dst to k distinct entities drawn uniformly from the window of
// w entities starting at centre on a ring of ents (w ≥ k), redrawing
// repeats, and returns it: the locality of the generated corpora (entities
// far apart on the ring never co-occur). It draws rng.IntN(w) once per try.
func Window(rng *rand.Rand, dst []int, centre, w, ents, k int) []int {
	dst = dst[:0]
	for len(dst) < k {
		e := (centre + rng.IntN(w)) % ents
		dup := false
		for _, p := range dst {
			dup = dup || p == e
		}
		if !dup {
			dst = append(dst, e)
		}
	}
	return dst
}

// Alternate runs a and base once each per b.Loop iteration, in alternating
// order so that neither always runs second (on a warmer cache, or while the
// shared machine is quieter), and returns the sums of what they return
// (their own CPU times, measured with CPUTime) and the iteration count. It
// calls b.ReportAllocs.
func Alternate(b *testing.B, a, base func() time.Duration) (ta, tbase time.Duration, n int) {
	b.ReportAllocs()
	for b.Loop() {
		if n%2 == 0 {
			ta += a()
			tbase += base()
		} else {
			tbase += base()
			ta += a()
		}
		n++
	}
	return ta, tbase, n
}
