package router

import (
	"hash/maphash"
	"math/bits"

	lru "github.com/hashicorp/golang-lru/v2"
)

// cacheKey identifies a search result. The names are the query's own
// strings (equal names ⇔ equal ids within one index); seq is the router's
// swap counter, gen the index content generation and cfg the configuration
// generation, so a new index or configuration never meets old entries.
// The A/B arm and the exploration draw are applied after the cache (see
// settings.finish), so units in different arms share entries.
type cacheKey struct {
	from, value, to string
	seq, gen, cfg   uint64
}

// decisionCache is a sharded golang-lru/v2 cache: each shard has its own
// lock, so concurrent hits on different keys rarely contend.
type decisionCache struct {
	seed   maphash.Seed
	mask   uint64
	shards []*lru.Cache[cacheKey, core]
}

func newDecisionCache(size, procs int) (*decisionCache, error) {
	n := 1
	for n < 4*procs && n < 64 && size/(2*n) >= 64 {
		n <<= 1
	}
	per := (size + n - 1) / n
	c := &decisionCache{seed: maphash.MakeSeed(), mask: uint64(n - 1)}
	for i := 0; i < n; i++ {
		s, err := lru.New[cacheKey, core](per)
		if err != nil {
			return nil, err
		}
		c.shards = append(c.shards, s)
	}
	return c, nil
}

func (c *decisionCache) shard(k *cacheKey) *lru.Cache[cacheKey, core] {
	h := maphash.String(c.seed, k.from) ^ bits.RotateLeft64(maphash.String(c.seed, k.to), 17) ^ uint64(len(k.value))*0x9e3779b97f4a7c15
	return c.shards[(h^h>>29)&c.mask]
}

func (c *decisionCache) get(k *cacheKey) (core, bool) { return c.shard(k).Get(*k) }

func (c *decisionCache) add(k *cacheKey, v core) { c.shard(k).Add(*k, v) }

func (c *decisionCache) purge() {
	for _, s := range c.shards {
		s.Purge()
	}
}

func (c *decisionCache) len() int {
	n := 0
	for _, s := range c.shards {
		n += s.Len()
	}
	return n
}
