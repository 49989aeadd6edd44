package router

// idIndex maps entity ids (or id pairs, a<<32|b) to positions: an open-addressed table with
// linear probing (Knuth, TAOCP vol. 3 §6.4, algorithm L) on a
// multiplicative hash, at most half full. Entries carry the stamp of the
// reset that made them, so reset is O(1) (no clearing) except when the
// table grows. put keeps the first position of an id.
type idIndex struct {
	tab   []idSlot
	stamp uint32
	shift uint
}

type idSlot struct {
	id    uint64
	pos   int32
	stamp uint32
}

// reset empties the index and makes room for n ids.
func (x *idIndex) reset(n int) {
	if size := 2 * n; len(x.tab) < size || len(x.tab) < 16 {
		l := log2(max(size, 16))
		x.tab = make([]idSlot, 1<<l)
		x.shift = uint(64 - l)
		x.stamp = 0
	}
	x.stamp++
	if x.stamp == 0 { // wrapped: old stamps could match again
		clear(x.tab)
		x.stamp = 1
	}
}

func (x *idIndex) slot(id uint64) int {
	return int((id * 0x9e3779b97f4a7c15) >> x.shift)
}

// put records pos for id unless id is already present.
func (x *idIndex) put(id uint64, pos int32) {
	mask := len(x.tab) - 1
	for i := x.slot(id); ; i = (i + 1) & mask {
		e := &x.tab[i]
		if e.stamp != x.stamp {
			*e = idSlot{id: id, pos: pos, stamp: x.stamp}
			return
		}
		if e.id == id {
			return
		}
	}
}

// get returns the position recorded for id.
func (x *idIndex) get(id uint64) (int32, bool) {
	mask := len(x.tab) - 1
	for i := x.slot(id); ; i = (i + 1) & mask {
		e := &x.tab[i]
		if e.stamp != x.stamp {
			return 0, false
		}
		if e.id == id {
			return e.pos, true
		}
	}
}

// idFilter is a one-hash Bloom filter (Bloom 1970) of 4096 bits over entity
// ids: has is false for every id never added, and true for an id not added
// with probability about n/4096 after n adds. The joins test it before
// probing an idIndex, so that the usual probe, a miss, costs one predictable
// branch instead of a probe loop whose slot tests mispredict. O(1) per add
// and test; reset clears 512 bytes.
type idFilter [64]uint64

func (f *idFilter) reset() { clear(f[:]) }

// bit is the filter position of id: the top 12 bits of a multiplicative
// hash (Knuth, TAOCP vol. 3 §6.4).
func idFilterBit(id uint64) uint64 { return (id * 0x9e3779b97f4a7c15) >> 52 }

func (f *idFilter) add(id uint64) {
	h := idFilterBit(id)
	f[h>>6] |= 1 << (h & 63)
}

func (f *idFilter) has(id uint64) bool {
	h := idFilterBit(id)
	return f[h>>6]&(1<<(h&63)) != 0
}
