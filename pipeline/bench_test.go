package pipeline

import (
	"fmt"
	"path/filepath"
	"runtime"
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

// BenchmarkRatiosPeakHeap reports the peak heap (sampled every 0.2 ms) of
// the ratios and stitch stages of one 128-site ring branch (65 sectors)
// with 2000, 8000 and 32000 sweeps per sector, one worker, against the
// size of the branch's samples: streaming the shards sector by sector
// keeps the growth to about one sector's series.
func BenchmarkRatiosPeakHeap(b *testing.B) {
	for _, sweeps := range []int{2000, 8000, 32000} {
		b.Run(fmt.Sprintf("sweeps%d", sweeps), func(b *testing.B) {
			st, err := ParseStudy("bench.toml", []byte(fmt.Sprintf(`
[model]
dimension = 1
sizes = [128]
betas = [0.5]
[sample]
sweeps = %d
chunk_sweeps = %d
[stitch]
replicas = 50
`, sweeps, sweeps/2)), nil)
			if err != nil {
				b.Fatal(err)
			}
			plan := BuildPlan(st)
			c, _ := cache.Open(filepath.Join(b.TempDir(), "c"))
			if err := (&Runner{Cache: c, Jobs: 2, Only: map[string]bool{"sample": true}}).Run(plan); err != nil {
				b.Fatal(err)
			}
			data := float64(len(plan.Branches[0].Samples)) * float64(sweeps/2) * 2 * 8 / 1e6
			for i := 0; i < b.N; i++ {
				cc, _ := cache.Open(c.Dir())
				cc.SetClock(func() time.Time { return time.Now() })
				// a fresh cache handle and fresh keys for ratios and stitch: recompute them
				plan2 := BuildPlan(st)
				for _, n := range plan2.Nodes {
					if n.Task.Stage != "sample" {
						n.Key = cache.Sum([]byte(n.Record + fmt.Sprintf("bench %d %d", i, time.Now().UnixNano())))
					}
				}
				runtime.GC()
				var base runtime.MemStats
				runtime.ReadMemStats(&base)
				peak := base.HeapInuse
				stop := make(chan struct{})
				done := make(chan struct{})
				go func() {
					defer close(done)
					var ms runtime.MemStats
					for {
						select {
						case <-stop:
							return
						case <-time.After(200 * time.Microsecond):
							runtime.ReadMemStats(&ms)
							peak = max(peak, ms.HeapInuse)
						}
					}
				}()
				r := &Runner{Cache: cc, Jobs: 1, Only: map[string]bool{"stitch": true}}
				if err := r.Run(plan2); err != nil {
					b.Fatal(err)
				}
				close(stop)
				<-done
				b.ReportMetric(float64(peak-base.HeapInuse)/1e6, "peak-MB")
				b.ReportMetric(data, "samples-MB")
			}
		})
	}
}
