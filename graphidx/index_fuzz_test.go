package graphidx

import (
	"path/filepath"
	"testing"
)

// FuzzOpen feeds arbitrary bytes to the parser, fully and lazily verified.
// It must never panic; whatever it accepts must serve every read method
// without panicking. Seeds: valid files (uniform and mixed K, empty) and
// mutations of them, so `go test` runs them as unit tests.
func FuzzOpen(f *testing.F) {
	dir := f.TempDir()
	var seeds [][]byte
	for i, src := range []Source{
		ixSourceFromContexts(ixGreenhouse()),
		ixRandomSource(12, 4, 2, 1),
		ixRandomSource(10, 3, 0, 2),
		&ixSource{},
	} {
		p := filepath.Join(dir, "seed"+string(rune('0'+i))+".hwx")
		if err := WriteFile(p, src, WithRankPrefix(2)); err != nil {
			f.Fatal(err)
		}
		seeds = append(seeds, ixReadFile(f, p))
	}
	for _, s := range seeds {
		f.Add(s)
		f.Add(s[:len(s)/2])
		m := append([]byte(nil), s...)
		m[len(m)-3] ^= 0x40
		f.Add(m)
		m = append([]byte(nil), s...)
		ixResealHeader(m)
		m[offEntities] ^= 1
		ixResealHeader(m)
		f.Add(m)
	}
	f.Add([]byte{})
	f.Add([]byte(Magic))
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, full := range []bool{true, false} {
			v, err := parse(data, full)
			if err != nil {
				if !IsCorruption(err) {
					t.Fatalf("error %v is not a corruption error", err)
				}
				continue
			}
			x := &Index{}
			x.v.Store(v)
			ixExercise(x)
			if full {
				if err := x.Verify(); err != nil {
					t.Fatalf("full open accepted what Verify rejects: %v", err)
				}
			} else {
				_ = x.Verify()
			}
		}
	})
}
