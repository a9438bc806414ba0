//go:build !linux

package gotarget

import "time"

// threadTime is the wall clock where no per-thread CPU clock is read.
func threadTime() int64 { return time.Now().UnixNano() }

// threadClock is the source of the benchmark driver's now().
const threadClock = `func now() int64 { return time.Now().UnixNano() }
`

// threadClockImports are the imports threadClock needs beyond the driver's.
const threadClockImports = "\t\"time\"\n"

// clockName says which clock the figures are in.
const clockName = "wall clock"
