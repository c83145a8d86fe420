package pipeline

import (
	"syscall"
	"unsafe"
)

// threadCPU returns the CPU seconds the calling OS thread has used
// (CLOCK_THREAD_CPUTIME_ID), and its clock's name.
func threadCPU() (float64, string) {
	var ts syscall.Timespec
	const clockThreadCPUTime = 3 // CLOCK_THREAD_CPUTIME_ID
	if _, _, e := syscall.Syscall(syscall.SYS_CLOCK_GETTIME, clockThreadCPUTime, uintptr(unsafe.Pointer(&ts)), 0); e != 0 {
		return wallSeconds(), "wall"
	}
	return float64(ts.Sec) + 1e-9*float64(ts.Nsec), "thread"
}
