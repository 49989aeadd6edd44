//go:build unix && !linux

package fileio

// adviseHuge is a no-op outside Linux: no portable huge-page advice.
func adviseHuge([]byte) {}
