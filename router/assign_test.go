package router

import (
	"encoding/binary"
	"testing"
)

// TestSipHashVectors checks SipHash-2-4 against the reference vectors with
// key 00 01 … 0f and message 00 01 … (n−1): Aumasson & Bernstein, "SipHash:
// a fast short-input PRF" (2012), Appendix A gives n = 15; n = 0 and n = 1
// are the first entries of the reference implementation's vectors.h (from
// memory).
func TestSipHashVectors(t *testing.T) {
	t.Parallel()
	var key [16]byte
	for i := range key {
		key[i] = byte(i)
	}
	k0 := binary.LittleEndian.Uint64(key[:8])
	k1 := binary.LittleEndian.Uint64(key[8:])
	cases := []struct {
		n    int
		want uint64
	}{
		{0, 0x726fdb47dd0e0e31},
		{1, 0x74f839c593dc67fd},
		{15, 0xa129ca6149be45e5},
	}
	for _, c := range cases {
		msg := make([]byte, c.n)
		for i := range msg {
			msg[i] = byte(i)
		}
		if got := sipHash24(k0, k1, msg); got != c.want {
			t.Errorf("n=%d: got %#016x, want %#016x", c.n, got, c.want)
		}
	}
}

// TestSipHashIncremental: writing in pieces (bytes, strings, words) equals
// hashing the concatenation.
func TestSipHashIncremental(t *testing.T) {
	t.Parallel()
	msg := []byte("greenhouse zone 3 vent north pump 2 bed tomato humidity")
	for split := 0; split <= len(msg); split++ {
		for split2 := split; split2 <= len(msg); split2 += 3 {
			h := newSip(11, 22)
			h.writeString(string(msg[:split]))
			for _, c := range msg[split:split2] {
				h.writeByte(c)
			}
			h.writeString(string(msg[split2:]))
			if got, want := h.sum64(), sipHash24(11, 22, msg); got != want {
				t.Fatalf("split %d/%d: %#x != %#x", split, split2, got, want)
			}
		}
	}
	var w [8]byte
	binary.LittleEndian.PutUint64(w[:], 0xdeadbeefcafef00d)
	for pre := 0; pre < 9; pre++ {
		h := newSip(1, 2)
		h.writeString(string(msg[:pre]))
		h.writeUint64(0xdeadbeefcafef00d)
		want := sipHash24(1, 2, append(append([]byte{}, msg[:pre]...), w[:]...))
		if got := h.sum64(); got != want {
			t.Fatalf("word after %d bytes: %#x != %#x", pre, got, want)
		}
	}
}

// TestUnitKeyDefault: an empty Query.Key hashes From‖0‖Value‖0‖To, so
// distinct triples land independently and the same triple is stable.
func TestUnitKeyDefault(t *testing.T) {
	t.Parallel()
	s := defaultSettings()
	a := s.unitUniform(domainArm, &Query{From: "vent", Value: "open", To: "bed"})
	b := s.unitUniform(domainArm, &Query{From: "vent", Value: "open", To: "bed"})
	c := s.unitUniform(domainArm, &Query{From: "vento", Value: "pen", To: "bed"})
	d := s.unitUniform(domainArm, &Query{Key: "vent\x00open\x00bed"})
	if a != b || a == c || a != d || a < 0 || a >= 1 {
		t.Fatalf("draws %v %v %v %v", a, b, c, d)
	}
}

// TestSipPrefixedMatchesStreaming: the register fast path equals the
// streaming hash for every tail length.
func TestSipPrefixedMatchesStreaming(t *testing.T) {
	t.Parallel()
	msg := "unit-key-for-the-north-greenhouse-bed-07"
	for n := 0; n <= len(msg); n++ {
		h := newSip(3, 5)
		h.writeUint64(0xfeedface12345678)
		h.writeString(msg[:n])
		if got, want := sipPrefixed(3, 5, 0xfeedface12345678, msg[:n]), h.sum64(); got != want {
			t.Fatalf("len %d: %#x != %#x", n, got, want)
		}
	}
}
