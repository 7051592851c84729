//go:build !unix

package report

import "time"

func cpuTime() time.Duration { return 0 }
