package gw

import (
	"encoding/binary"
	"hash/maphash"
	"math"
	"sync"

	lru "github.com/hashicorp/golang-lru/v2"
	"github.com/hopwise/hopwise/router"
)

// DefaultPlanCacheSize is the number of rendered instructions the
// gateway's PlanRenderer keeps (Config.PlanCacheSize).
const DefaultPlanCacheSize = 4096

// PlanCache keeps rendered instructions, keyed by everything a plan is
// computed from: the decision's index generation, the router's
// configuration generation (router.Router.ConfigGeneration), the query,
// and the decision's mode, bridges (those of its chain too), reason code,
// truncation, error, supports, target labels and estimate, bit for bit.
// A decision served again (the router's decision cache, or the same
// question from another unit) then costs one look-up instead of the
// chain distributions (router.Router.ChainDists, O(m²·K³)) and the
// template. The unit key, arm and propensity are not part of a plan and
// not of the key.
//
// A PlanCache serves one PlanRenderer (one router, namer and renderer):
// give each its own. It is safe for concurrent use; the least recently
// used entry goes first. A hit costs O(key) (hashing and comparing the
// key, tens of bytes) and allocates nothing.
type PlanCache struct {
	seed    maphash.Seed
	entries *lru.Cache[uint64, planEntry]
	keys    sync.Pool // *[]byte key buffers
}

type planEntry struct{ key, text string }

// NewPlanCache returns a cache of at most size instructions (size ≥ 1).
func NewPlanCache(size int) (*PlanCache, error) {
	c, err := lru.New[uint64, planEntry](size)
	if err != nil {
		return nil, err
	}
	return &PlanCache{seed: maphash.MakeSeed(), entries: c, keys: sync.Pool{New: func() any { b := make([]byte, 0, 256); return &b }}}, nil
}

// Len returns the number of cached instructions.
func (c *PlanCache) Len() int { return c.entries.Len() }

// render returns the cached text for (cgen, q, d), or calls build and
// keeps what it returns without error.
func (c *PlanCache) render(cgen uint64, q router.Query, d *router.Decision, build func() (string, error)) (string, error) {
	bp := c.keys.Get().(*[]byte)
	key := appendPlanKey((*bp)[:0], cgen, q, d)
	h := maphash.Bytes(c.seed, key)
	if e, ok := c.entries.Get(h); ok && e.key == string(key) {
		*bp = key
		c.keys.Put(bp)
		return e.text, nil
	}
	text, err := build()
	if err == nil {
		c.entries.Add(h, planEntry{key: string(key), text: text})
	}
	*bp = key
	c.keys.Put(bp)
	return text, err
}

// appendPlanKey appends the cache key of a plan: fixed-width numbers and
// length-prefixed strings, so that distinct inputs give distinct keys.
func appendPlanKey(b []byte, cgen uint64, q router.Query, d *router.Decision) []byte {
	u64 := binary.LittleEndian.AppendUint64
	str := func(b []byte, s string) []byte { return append(binary.AppendUvarint(b, uint64(len(s))), s...) }
	strs := func(b []byte, ss []string) []byte {
		b = binary.AppendUvarint(b, uint64(len(ss)))
		for _, s := range ss {
			b = str(b, s)
		}
		return b
	}
	b = u64(u64(b, d.Generation), cgen)
	b = str(str(str(b, q.From), q.Value), q.To)
	flags := byte(0)
	if d.Truncated {
		flags = 1
	}
	if d.Chain != nil && d.Chain.Parallel {
		flags |= 2 // a parallel plan renders differently
	}
	b = append(b, byte(d.Mode), flags)
	b = str(b, d.Reason.Code)
	b = u64(u64(b, math.Float64bits(d.Err)), d.Direct.Support)
	b = strs(b, d.Bridges)
	if d.Chain != nil {
		b = strs(u64(append(b, 1), d.Chain.MinSupport), d.Chain.Bridges)
	} else {
		b = append(b, 0)
	}
	b = strs(b, d.Values)
	b = binary.AppendUvarint(b, uint64(len(d.Estimate)))
	for _, x := range d.Estimate {
		b = u64(b, math.Float64bits(x))
	}
	return b
}
