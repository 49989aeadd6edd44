package counts

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"os"
)

// ErrDuplicateCounts reports that one count set was given twice to a merge
// (by the same path, another spelling of it, or a copy). Merging it would
// add its counts twice and report twice its contexts. It wraps
// ErrBadCounts.
var ErrDuplicateCounts = fmt.Errorf("%w: the same count set given twice", ErrBadCounts)

// CountSetID returns the identity of the count set in dir: the SHA-256, in
// hex, of the headers of its shards in shard order. A header holds the
// shard's number and the set's shard count, its record counts and section
// lengths, and the CRC-32C of each section, so two directories with the same
// ID hold the same counts (a copy of a set has its ID), and a set that
// differs in any record has another ID except for a CRC collision in both
// sections of a shard. The set must be complete (see ReadCounts); the
// records are not read or checked. O(shards) small reads.
func CountSetID(dir string) (string, error) {
	paths, err := listCountSet(dir)
	if err != nil {
		return "", err
	}
	h := sha256.New()
	var hd [countsHeaderSize]byte
	for _, p := range paths {
		f, err := os.Open(p)
		if err != nil {
			return "", fmt.Errorf("graphidx: read count shard: %w", err)
		}
		_, err = io.ReadFull(f, hd[:])
		f.Close()
		if err != nil {
			return "", fmt.Errorf("%w: %s: header: %v", ErrBadCounts, p, err)
		}
		h.Write(hd[:])
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

// CheckDistinctCountSets returns an ErrDuplicateCounts error naming both
// directories when two of dirs hold the same count set (CountSetID), and
// the error of CountSetID for a directory that is not a complete set.
// MergeCounts calls it; callers that add sets with ReadCounts should too.
func CheckDistinctCountSets(dirs []string) error {
	seen := make(map[string]string, len(dirs))
	for _, d := range dirs {
		id, err := CountSetID(d)
		if err != nil {
			return err
		}
		if first, ok := seen[id]; ok {
			return fmt.Errorf("%w: %s and %s hold the same counts (identical shard headers); merging would count its contexts twice", ErrDuplicateCounts, first, d)
		}
		seen[id] = d
	}
	return nil
}
