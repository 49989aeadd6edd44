package graphidx

import (
	"bytes"
	"errors"
	"hash/maphash"
	"math/bits"
	"slices"
	"unsafe"
)

// strTable interns byte strings into one arena: string i is
// arena[off[i]:off[i+1]], found by an open-addressing table of indexes.
// Memory: the bytes, 4 bytes of offset and 4–8 bytes of slots per string.
type strTable struct {
	arena []byte
	off   []uint32
	slots []uint32 // index+1, 0 empty; len a power of two
	seed  maphash.Seed
}

var errArenaFull = errors.New("more than 4 GiB of names")

func (t *strTable) init() {
	t.seed = maphash.MakeSeed()
	t.off = []uint32{0}
	t.slots = make([]uint32, 64)
}

func (t *strTable) len() int { return len(t.off) - 1 }

func (t *strTable) bytes(i uint32) []byte { return t.arena[t.off[i]:t.off[i+1]] }

// str returns string i without copying. The arena is never written after
// loading, so the string is immutable.
func (t *strTable) str(i uint32) string { return bstr(t.bytes(i)) }

// bstr views b as a string without copying; b must never change afterwards.
func bstr(b []byte) string {
	if len(b) == 0 {
		return ""
	}
	return unsafe.String(&b[0], len(b))
}

func (t *strTable) probe(h uint64, eq func(i uint32) bool) (int, bool) {
	mask := uint64(len(t.slots) - 1)
	for i := h & mask; ; i = (i + 1) & mask {
		s := t.slots[i]
		if s == 0 {
			return int(i), false
		}
		if eq(s - 1) {
			return int(i), true
		}
	}
}

// find returns the index of s. O(|s|) expected.
func (t *strTable) find(s string) (uint32, bool) {
	if t.slots == nil {
		return 0, false
	}
	i, ok := t.probe(maphash.String(t.seed, s), func(j uint32) bool { return string(t.bytes(j)) == s })
	if !ok {
		return 0, false
	}
	return t.slots[i] - 1, true
}

// intern returns the index of b, adding it when new.
func (t *strTable) intern(b []byte) (uint32, bool, error) {
	h := maphash.Bytes(t.seed, b)
	i, ok := t.probe(h, func(j uint32) bool { return bytes.Equal(t.bytes(j), b) })
	if ok {
		return t.slots[i] - 1, false, nil
	}
	if len(t.arena)+len(b) > 1<<32-1 {
		return 0, false, errArenaFull
	}
	idx := uint32(t.len())
	t.arena = append(t.arena, b...)
	t.off = append(t.off, uint32(len(t.arena)))
	t.slots[i] = idx + 1
	if 4*t.len() > 3*len(t.slots) {
		t.grow(2 * len(t.slots))
	}
	return idx, true, nil
}

func (t *strTable) grow(n int) {
	t.slots = make([]uint32, n)
	mask := uint64(n - 1)
	for j := range uint32(t.len()) {
		i := maphash.Bytes(t.seed, t.bytes(j)) & mask
		for t.slots[i] != 0 {
			i = (i + 1) & mask
		}
		t.slots[i] = j + 1
	}
}

// trim drops spare capacity; the slot table keeps a load of at most 3/4.
func (t *strTable) trim() {
	t.arena = slices.Clone(t.arena)
	t.off = slices.Clone(t.off)
	if want := 1 << bits.Len(uint(t.len()*4/3+1)); want < len(t.slots) {
		t.grow(want)
	}
}

func (t *strTable) memBytes() int64 {
	return int64(cap(t.arena) + 4*cap(t.off) + 4*cap(t.slots))
}
