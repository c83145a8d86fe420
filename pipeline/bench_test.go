package pipeline

import (
	"path/filepath"
	"testing"
	"time"

	"strata/cache"
)

// BenchmarkSampleJobs runs the sample stage of a 2D 16² study with a cold
// cache on 1 and on 2 workers and reports the speed-up t(1)/t(2).
func BenchmarkSampleJobs(b *testing.B) {
	st, err := ParseStudy("bench.toml", []byte(`
[model]
dimension = 2
sizes = [16]
betas = [0.3]
[sample]
sweeps = 2000
`), nil)
	if err != nil {
		b.Fatal(err)
	}
	timeWith := func(jobs int) float64 {
		c, _ := cache.Open(filepath.Join(b.TempDir(), "c"))
		r := &Runner{Cache: c, Jobs: jobs, Only: map[string]bool{"sample": true}}
		start := time.Now()
		if err := r.Run(BuildPlan(st)); err != nil {
			b.Fatal(err)
		}
		return time.Since(start).Seconds()
	}
	for i := 0; i < b.N; i++ {
		t1 := timeWith(1)
		t2 := timeWith(2)
		b.ReportMetric(t1/t2, "speedup")
		b.ReportMetric(t1, "s/jobs1")
	}
}
