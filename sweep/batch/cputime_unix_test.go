//go:build unix

package batch

import (
	"syscall"
	"time"
)

// cpuTime is the process's user + system CPU time, so that the benchmark
// can report CPU milliseconds that do not depend on the machine's load.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}
