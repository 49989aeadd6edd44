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
