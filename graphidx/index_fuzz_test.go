package graphidx

import (
	"hash/crc32"
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

// FuzzOpenResealed mutates valid files and then recomputes every checksum
// and the generation, so the mutations reach the section-table, structural
// and read paths instead of stopping at a CRC. It models a crafted file:
// it must be rejected with a corruption error or served without panics,
// and a full open must agree with Verify.
func FuzzOpenResealed(f *testing.F) {
	dir := f.TempDir()
	for i, src := range []Source{
		ixSourceFromContexts(ixGreenhouse()),
		ixRandomSource(12, 4, 2, 1),
		ixRandomSource(10, 3, 0, 2),
	} {
		p := filepath.Join(dir, "seed"+string(rune('0'+i))+".hwx")
		if err := WriteFile(p, src, WithRankPrefix(2)); err != nil {
			f.Fatal(err)
		}
		b := ixReadFile(f, p)
		f.Add(b, uint16(0), byte(0))
		f.Add(b, uint16(len(b)-1), byte(1))
		f.Add(b, uint16(headerSize+3), byte(0x80))
		f.Add(b, uint16(offPairs), byte(1))
		rt := decodeHeader(b).Sections[secRankTab-1]
		f.Add(b, uint16(rt.Offset), byte(1))      // a table reference's start
		f.Add(b, uint16(rt.Offset+6), byte(0x10)) // its K_lo
		f.Add(b, uint16(rt.Offset+7), byte(0xf0)) // its K_hi
	}
	f.Fuzz(func(t *testing.T, data []byte, pos uint16, mask byte) {
		data = append([]byte(nil), data...)
		if int(pos) < len(data) {
			data[pos] ^= mask
		}
		if len(data) >= headerSize {
			h := decodeHeader(data)
			for i, s := range h.Sections {
				if s.Offset <= uint64(len(data)) && s.Length <= uint64(len(data))-s.Offset {
					e := data[tableOffset+i*tableEntrySize:]
					le.PutUint32(e[16:], crc32.Checksum(data[s.Offset:s.Offset+s.Length], castagnoli))
				}
			}
			ixResealHeader(data)
		}
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
			err = x.Verify()
			if full && err != nil {
				t.Fatalf("full open accepted what Verify rejects: %v", err)
			}
			if err == nil {
				for id := range x.NumEntities() {
					if j := ixHintedDisagree(x, EntityID(id)); j >= 0 {
						t.Fatalf("entity %d, ranked neighbour %d: hinted look-up differs from Pair on a verified file", id, j)
					}
					if j := ixRankedDisagree(x, EntityID(id)); j >= 0 {
						t.Fatalf("entity %d, ranked entry %d: look-up by ranked entry differs from Pair on a verified file (full open %v)", id, j, full)
					}
				}
			}
		}
	})
}
