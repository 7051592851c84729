//go:build !unix

package export

import "time"

func cpuTime() time.Duration { return 0 }
