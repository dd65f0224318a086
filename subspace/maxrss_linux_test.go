package subspace

import "syscall"

// maxRSS returns the peak resident size of this process in bytes
// (getrusage's ru_maxrss, in KiB on Linux), or −1 if it cannot be read.
func maxRSS() int64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return -1
	}
	return int64(ru.Maxrss) * 1024
}
