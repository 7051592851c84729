//go:build !unix

package batch

import "time"

func cpuTime() time.Duration { return 0 }
