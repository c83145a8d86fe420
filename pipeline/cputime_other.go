//go:build !linux

package pipeline

// threadCPU falls back to wall time where no per-thread CPU clock is read.
func threadCPU() (float64, string) { return wallSeconds(), "wall" }
