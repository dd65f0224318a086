//go:build !linux

package subspace

// maxRSS returns −1: the peak resident size is read on Linux only.
func maxRSS() int64 { return -1 }
