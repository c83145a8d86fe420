package pipeline

import "time"

// wallSeconds is the wall clock in seconds (the fallback of threadCPU).
func wallSeconds() float64 { return float64(time.Now().UnixNano()) * 1e-9 }

// ShardMeta is the provenance a computed sample shard leaves beside its
// cache entry: not hashed, not part of any output's identity.
type ShardMeta struct {
	CPUSeconds float64 `json:"cpu_seconds"`
	Clock      string  `json:"clock"` // "thread" (per-thread CPU time) or "wall"
}
