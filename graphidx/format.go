package graphidx

import (
	"encoding/binary"
	"hash/crc32"
)

// On-disk layout constants of the locality index file. FORMAT.md is the
// byte-level specification; these names are the ones it uses.
const (
	// Magic is the 8-byte file signature at offset 0.
	Magic = "HWLOCIX\x00"
	// FormatVersion is the only format version this package reads and
	// writes. Version 2 added the ranked-pair-positions section, version 3
	// the ranked-pair-tables section; an older file is refused with
	// ErrVersion (rebuild it).
	FormatVersion = 3

	// DefaultRankPrefix is the default length of the support-ranked
	// neighbour prefix stored per entity (WithRankPrefix).
	DefaultRankPrefix = 64

	// headerSize is the fixed size of a version-3 header, section table
	// and header checksum included. Sections start at this offset.
	headerSize = 544
	// headerCRCOffset is where the header checksum (CRC-32C of bytes
	// [0, headerCRCOffset)) is stored.
	headerCRCOffset = 540
	// tableOffset is where the section table starts.
	tableOffset = 104
	// tableEntrySize is the size of one section table entry.
	tableEntrySize = 24
	// sectionAlign is the alignment of every section's start offset.
	sectionAlign = 8

	// flagUniformK marks an index whose entities all have the same number
	// of values; it then carries no marginal or pair offset arrays.
	flagUniformK = 1 << 0
	// knownFlags is the set of flags version 3 defines.
	knownFlags = flagUniformK
)

// Header field offsets (little-endian).
const (
	offMagic      = 0
	offVersion    = 8
	offFlags      = 12
	offHeaderSize = 16
	offNumSect    = 20
	offContexts   = 24
	offEntities   = 32
	offPairs      = 40
	offEdges      = 48
	offValues     = 56
	offLabels     = 64
	offVSets      = 72
	offUniformK   = 80
	offRankPrefix = 84
	offGeneration = 88
	offFileSize   = 96
	offReserved   = 536 // uint32, must be zero
)

// Section identifiers; section i of the table has id i+1.
const (
	secNameOffs   = iota + 1 // uint64[n+1] byte offsets into secNameBytes
	secNameBytes             // entity names, concatenated, ascending
	secLabelOffs             // uint64[L+1] byte offsets into secLabelBytes
	secLabelBytes            // distinct value labels, concatenated, ascending
	secVSetOffs              // uint32[S+1] offsets into secVSetLabels
	secVSetLabels            // uint32 label ids, each value set ascending
	secEntVSet               // uint32[n] value-set id per entity
	secMargOffs              // uint64[n+1] offsets into secMarginals (empty if uniform K)
	secMarginals             // uint64 marginal counts per entity value
	secNbrOffs               // uint64[n+1] CSR offsets into secNbrs
	secNbrs                  // uint32 neighbour ids, ascending per entity
	secPairBase              // uint64[n+1] number of stored pairs with lo < i
	secPairOffs              // uint64[P+1] offsets into secCounts (empty if uniform K)
	secCounts                // uint32 K_lo×K_hi row-major tables, pair order
	secRankOffs              // uint64[n+1] offsets into secRank
	secRank                  // uint32 support-ranked neighbour prefixes
	secRankPos               // uint32 per secRank entry: the pair's position in lo's upper list
	secRankTab               // uint64 per secRank entry: the pair's table (rankTabRef)
	numSections   = secRankTab
)

var sectionNames = [numSections + 1]string{
	"", "name-offsets", "name-bytes", "label-offsets", "label-bytes",
	"valueset-offsets", "valueset-labels", "entity-valueset", "marginal-offsets",
	"marginals", "neighbour-offsets", "neighbours", "pair-base", "pair-offsets",
	"counts", "rank-offsets", "ranked-neighbours", "ranked-pair-positions",
	"ranked-pair-tables",
}

// A ranked-pair-tables entry (section 18) names the count table of the
// pair {i, y} of a ranked entry: bits 0–51 hold the index in the counts
// section (in uint32 entries) of the table's first count, bits 52–57
// K_lo−1 and bits 58–63 K_hi−1 (lo = min(i, y), hi = max(i, y)), so the
// table is counts[start : start+K_lo·K_hi]. FORMAT.md, Ranked pair tables.
const (
	rankTabStartBits = 52
	rankTabStartMask = 1<<rankTabStartBits - 1
	// maxRankTabStart bounds the counts a version-3 file can address
	// through its ranked pair tables (2⁵² entries, 16 PiB of counts).
	maxRankTabStart = rankTabStartMask
)

// rankTabRef encodes a ranked-pair-tables entry: the table starting at
// counts entry start of a pair whose lower entity has kLo values and upper
// entity kHi (both 1..64; start ≤ maxRankTabStart).
func rankTabRef(start uint64, kLo, kHi int) uint64 {
	return start | uint64(kLo-1)<<rankTabStartBits | uint64(kHi-1)<<(rankTabStartBits+6)
}

// rankTabSplit decodes a ranked-pair-tables entry (rankTabRef).
func rankTabSplit(r uint64) (start uint64, kLo, kHi int) {
	return r & rankTabStartMask, int(r>>rankTabStartBits&63) + 1, int(r>>(rankTabStartBits+6)) + 1
}

// sectionName returns the human name of a section id.
func sectionName(id int) string {
	if id <= 0 || id > numSections {
		return "unknown"
	}
	return sectionNames[id]
}

// castagnoli is the CRC-32C table used for every checksum in the file.
var castagnoli = crc32.MakeTable(crc32.Castagnoli)

// le is the byte order of every integer in the file.
var le = binary.LittleEndian

// sectionEntry is one row of the section table.
type sectionEntry struct {
	Offset uint64
	Length uint64
	CRC    uint32
	ID     uint32
}

// header is the decoded fixed header.
type header struct {
	Version    uint32
	Flags      uint32
	Contexts   uint64
	Entities   uint64
	Pairs      uint64
	Edges      uint64
	Values     uint64
	Labels     uint64
	VSets      uint64
	UniformK   uint32
	RankPrefix uint32
	Generation uint64
	FileSize   uint64
	Sections   [numSections]sectionEntry
}

// encode writes the header into b (len ≥ headerSize), including the header
// checksum.
func (h *header) encode(b []byte) {
	clear(b[:headerSize])
	copy(b[offMagic:], Magic)
	le.PutUint32(b[offVersion:], h.Version)
	le.PutUint32(b[offFlags:], h.Flags)
	le.PutUint32(b[offHeaderSize:], headerSize)
	le.PutUint32(b[offNumSect:], numSections)
	le.PutUint64(b[offContexts:], h.Contexts)
	le.PutUint64(b[offEntities:], h.Entities)
	le.PutUint64(b[offPairs:], h.Pairs)
	le.PutUint64(b[offEdges:], h.Edges)
	le.PutUint64(b[offValues:], h.Values)
	le.PutUint64(b[offLabels:], h.Labels)
	le.PutUint64(b[offVSets:], h.VSets)
	le.PutUint32(b[offUniformK:], h.UniformK)
	le.PutUint32(b[offRankPrefix:], h.RankPrefix)
	le.PutUint64(b[offGeneration:], h.Generation)
	le.PutUint64(b[offFileSize:], h.FileSize)
	for i, s := range h.Sections {
		e := b[tableOffset+i*tableEntrySize:]
		le.PutUint64(e[0:], s.Offset)
		le.PutUint64(e[8:], s.Length)
		le.PutUint32(e[16:], s.CRC)
		le.PutUint32(e[20:], s.ID)
	}
	le.PutUint32(b[headerCRCOffset:], crc32.Checksum(b[:headerCRCOffset], castagnoli))
}

// decodeHeader reads the fields of b (len ≥ headerSize). It checks nothing.
func decodeHeader(b []byte) header {
	var h header
	h.Version = le.Uint32(b[offVersion:])
	h.Flags = le.Uint32(b[offFlags:])
	h.Contexts = le.Uint64(b[offContexts:])
	h.Entities = le.Uint64(b[offEntities:])
	h.Pairs = le.Uint64(b[offPairs:])
	h.Edges = le.Uint64(b[offEdges:])
	h.Values = le.Uint64(b[offValues:])
	h.Labels = le.Uint64(b[offLabels:])
	h.VSets = le.Uint64(b[offVSets:])
	h.UniformK = le.Uint32(b[offUniformK:])
	h.RankPrefix = le.Uint32(b[offRankPrefix:])
	h.Generation = le.Uint64(b[offGeneration:])
	h.FileSize = le.Uint64(b[offFileSize:])
	for i := range h.Sections {
		e := b[tableOffset+i*tableEntrySize:]
		h.Sections[i] = sectionEntry{
			Offset: le.Uint64(e[0:]),
			Length: le.Uint64(e[8:]),
			CRC:    le.Uint32(e[16:]),
			ID:     le.Uint32(e[20:]),
		}
	}
	return h
}

// generationOf is the content fingerprint stored in the header: a 64-bit
// FNV-1a hash over the counts and every section's length and CRC-32C. Two
// files with equal sections have equal generations; it contains no time.
func generationOf(h *header) uint64 {
	const (
		offset64 = 14695981039346656037
		prime64  = 1099511628211
	)
	g := uint64(offset64)
	mix := func(v uint64) {
		for i := 0; i < 8; i++ {
			g ^= v & 0xff
			g *= prime64
			v >>= 8
		}
	}
	mix(uint64(h.Version))
	mix(uint64(h.Flags))
	mix(h.Contexts)
	mix(h.Entities)
	mix(h.Pairs)
	mix(uint64(h.UniformK))
	mix(uint64(h.RankPrefix))
	for _, s := range h.Sections {
		mix(s.Length)
		mix(uint64(s.CRC))
	}
	return g
}

// align8 rounds n up to a multiple of sectionAlign.
func align8(n uint64) uint64 { return (n + sectionAlign - 1) &^ (sectionAlign - 1) }
