package gotarget

import (
	"syscall"
	"unsafe"
)

// threadTime is this thread's CPU time in ns (clock_gettime with
// CLOCK_THREAD_CPUTIME_ID, Linux), so that on a shared machine the time the
// scheduler gives other processes does not count.
func threadTime() int64 {
	var ts syscall.Timespec
	const threadCPUTime = 3 // CLOCK_THREAD_CPUTIME_ID, linux/time.h
	if _, _, e := syscall.Syscall(syscall.SYS_CLOCK_GETTIME, threadCPUTime, uintptr(unsafe.Pointer(&ts)), 0); e != 0 {
		panic("clock_gettime: " + e.Error())
	}
	return ts.Nano()
}

// threadClock is the source of the benchmark driver's now(), which reads
// the same clock.
const threadClock = `func now() int64 {
	var ts syscall.Timespec
	if _, _, e := syscall.Syscall(syscall.SYS_CLOCK_GETTIME, 3, uintptr(unsafe.Pointer(&ts)), 0); e != 0 { // CLOCK_THREAD_CPUTIME_ID
		panic(e)
	}
	return ts.Nano()
}
`

// threadClockImports are the imports threadClock needs.
const threadClockImports = "\t\"syscall\"\n\t\"unsafe\"\n"

// clockName says which clock the figures are in.
const clockName = "thread CPU time"
