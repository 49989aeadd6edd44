package router

import "math/bits"

// Unit assignment for A/B arms and exploration.
//
// Both draws are SipHash-2-4 (Aumasson & Bernstein, "SipHash: a fast
// short-input PRF", INDOCRYPT 2012) under the router's 128-bit key, over the
// message le64(domain) ‖ unit key, where domain separates the arm draw from
// the exploration draw (the exploration salt is part of its domain). The top
// 53 bits of the hash give a uniform u ∈ [0, 1). The unit key is
// Query.Key; when it is empty the key is From ‖ 0x00 ‖ Value ‖ 0x00 ‖ To.
// Assignment therefore never depends on trace ids, time or process state:
// the same key and hash key give the same arm on every machine.

const (
	domainArm     = 0x6172_6d00_0000_0001 // "arm" tag
	domainExplore = 0x6578_706c_0000_0002 // "expl" tag, xored with the salt
)

// sip is an incremental SipHash-2-4 state.
type sip struct {
	v0, v1, v2, v3 uint64
	tail           uint64 // pending bytes, little-endian
	ntail          uint
	length         uint64
}

func newSip(k0, k1 uint64) sip {
	return sip{
		v0: k0 ^ 0x736f6d6570736575,
		v1: k1 ^ 0x646f72616e646f6d,
		v2: k0 ^ 0x6c7967656e657261,
		v3: k1 ^ 0x7465646279746573,
	}
}

func (h *sip) round() {
	h.v0 += h.v1
	h.v1 = bits.RotateLeft64(h.v1, 13)
	h.v1 ^= h.v0
	h.v0 = bits.RotateLeft64(h.v0, 32)
	h.v2 += h.v3
	h.v3 = bits.RotateLeft64(h.v3, 16)
	h.v3 ^= h.v2
	h.v0 += h.v3
	h.v3 = bits.RotateLeft64(h.v3, 21)
	h.v3 ^= h.v0
	h.v2 += h.v1
	h.v1 = bits.RotateLeft64(h.v1, 17)
	h.v1 ^= h.v2
	h.v2 = bits.RotateLeft64(h.v2, 32)
}

func (h *sip) block(m uint64) {
	h.v3 ^= m
	h.round()
	h.round()
	h.v0 ^= m
}

func (h *sip) writeByte(c byte) {
	h.tail |= uint64(c) << (8 * h.ntail)
	h.ntail++
	h.length++
	if h.ntail == 8 {
		h.block(h.tail)
		h.tail, h.ntail = 0, 0
	}
}

func (h *sip) writeString(s string) {
	i := 0
	for ; i < len(s) && h.ntail != 0; i++ {
		h.writeByte(s[i])
	}
	for ; i+8 <= len(s); i += 8 {
		m := uint64(s[i]) | uint64(s[i+1])<<8 | uint64(s[i+2])<<16 | uint64(s[i+3])<<24 |
			uint64(s[i+4])<<32 | uint64(s[i+5])<<40 | uint64(s[i+6])<<48 | uint64(s[i+7])<<56
		h.block(m)
		h.length += 8
	}
	for ; i < len(s); i++ {
		h.writeByte(s[i])
	}
}

func (h *sip) writeUint64(x uint64) {
	if h.ntail == 0 {
		h.block(x)
		h.length += 8
		return
	}
	for i := 0; i < 8; i++ {
		h.writeByte(byte(x >> (8 * i)))
	}
}

func (h *sip) sum64() uint64 {
	b := h.tail | (h.length&0xff)<<56
	h.block(b)
	h.v2 ^= 0xff
	h.round()
	h.round()
	h.round()
	h.round()
	return h.v0 ^ h.v1 ^ h.v2 ^ h.v3
}

// sipHash24 hashes one byte string (used by the test vectors).
func sipHash24(k0, k1 uint64, msg []byte) uint64 {
	h := newSip(k0, k1)
	h.writeString(string(msg))
	return h.sum64()
}

func sipRound(v0, v1, v2, v3 uint64) (uint64, uint64, uint64, uint64) {
	v0 += v1
	v1 = bits.RotateLeft64(v1, 13)
	v1 ^= v0
	v0 = bits.RotateLeft64(v0, 32)
	v2 += v3
	v3 = bits.RotateLeft64(v3, 16)
	v3 ^= v2
	v0 += v3
	v3 = bits.RotateLeft64(v3, 21)
	v3 ^= v0
	v2 += v1
	v1 = bits.RotateLeft64(v1, 17)
	v1 ^= v2
	v2 = bits.RotateLeft64(v2, 32)
	return v0, v1, v2, v3
}

// sipPrefixed is SipHash-2-4 of le64(prefix) ‖ s with the state in
// registers: the fast path of unitUniform (equal to the streaming sip).
func sipPrefixed(k0, k1, prefix uint64, s string) uint64 {
	v0 := k0 ^ 0x736f6d6570736575
	v1 := k1 ^ 0x646f72616e646f6d
	v2 := k0 ^ 0x6c7967656e657261
	v3 := k1 ^ 0x7465646279746573
	m := prefix
	v3 ^= m
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	v0 ^= m
	i := 0
	for ; i+8 <= len(s); i += 8 {
		m = uint64(s[i]) | uint64(s[i+1])<<8 | uint64(s[i+2])<<16 | uint64(s[i+3])<<24 |
			uint64(s[i+4])<<32 | uint64(s[i+5])<<40 | uint64(s[i+6])<<48 | uint64(s[i+7])<<56
		v3 ^= m
		v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
		v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
		v0 ^= m
	}
	m = uint64(len(s)+8) << 56
	for j := 0; i+j < len(s); j++ {
		m |= uint64(s[i+j]) << (8 * j)
	}
	v3 ^= m
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	v0 ^= m
	v2 ^= 0xff
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	v0, v1, v2, v3 = sipRound(v0, v1, v2, v3)
	return v0 ^ v1 ^ v2 ^ v3
}

// unitUniform returns the deterministic uniform draw in [0, 1) of the query's
// unit under the given domain. O(len(key)); no allocation.
func (s *settings) unitUniform(domain uint64, q *Query) float64 {
	if q.Key != "" {
		return float64(sipPrefixed(s.k0, s.k1, domain, q.Key)>>11) * (1.0 / (1 << 53))
	}
	h := newSip(s.k0, s.k1)
	h.writeUint64(domain)
	{
		h.writeString(q.From)
		h.writeByte(0)
		h.writeString(q.Value)
		h.writeByte(0)
		h.writeString(q.To)
	}
	return float64(h.sum64()>>11) * (1.0 / (1 << 53))
}

// assignArm returns the arm index of the unit, or -1 when no arms are set.
func (s *settings) assignArm(q *Query) int {
	if len(s.arms) == 0 {
		return -1
	}
	u := s.unitUniform(domainArm, q)
	for i := range s.arms {
		if u < s.arms[i].cum {
			return i
		}
	}
	return len(s.arms) - 1
}

// explores reports whether the unit's exploration draw falls below ε.
func (s *settings) explores(q *Query) bool {
	if s.epsilon <= 0 {
		return false
	}
	return s.unitUniform(domainExplore^s.exploreSalt, q) < s.epsilon
}
