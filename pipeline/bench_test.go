package pipeline

import (
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"testing"
	"time"

	"strata/cache"
	"strata/stages"
	"strata/stages/lattice"
	"strata/stages/ratio"
	"strata/stages/sampler"
	"strata/stages/sampler/baseline"
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

// BenchmarkRunEfficiency compares a whole strata run (sample and ratios
// of 2D 16² at β = 0.3, cold cache, all cores, wall time T) with the plain
// approach (package baseline: two-sector single-spin Metropolis, random
// site order, one core, errors by binning): per sampled sector pair i,
// (σ²·t)_plain / (σ_i²·T/pairs), t_plain the plain chain's time for its
// pair. It reports the median and the smallest over every 8th pair.
func BenchmarkRunEfficiency(b *testing.B) {
	const beta = 0.3
	st, err := ParseStudy("bench.toml", []byte(`
[model]
dimension = 2
sizes = [16]
betas = [0.3]
[sample]
sweeps = 2048
chunk_sweeps = 1024
[exact]
enabled = false
`), nil)
	if err != nil {
		b.Fatal(err)
	}
	lat, _ := lattice.New(2, 16)
	for i := 0; i < b.N; i++ {
		plan := BuildPlan(st)
		c, _ := cache.Open(filepath.Join(b.TempDir(), "c"))
		start := time.Now()
		if err := (&Runner{Cache: c, Jobs: runtime.GOMAXPROCS(0), Only: map[string]bool{"ratios": true}}).Run(plan); err != nil {
			b.Fatal(err)
		}
		wall := time.Since(start).Seconds()
		res, err := load[stages.RatiosOut](c, plan.Branches[0].Ratios)
		if err != nil {
			b.Fatal(err)
		}
		perPair := wall / float64(len(res.Result.Ratios))
		var ratios []float64
		for k, q := range res.Result.Ratios {
			if q.Err == 0 || k%8 != 2 {
				continue
			}
			t0 := time.Now()
			x := baseline.Pair(lat, beta, q.M, 100, 4000, uint64(q.M+lat.N))
			tPlain := time.Since(t0).Seconds()
			_, e := baseline.LnRatio(x)
			ratios = append(ratios, e*e*tPlain/(q.Err*q.Err*perPair))
		}
		sort.Float64s(ratios)
		b.ReportMetric(ratios[len(ratios)/2], "median-efficiency-ratio")
		b.ReportMetric(ratios[0], "min-efficiency-ratio")
		b.ReportMetric(wall, "s/run")
	}
}

// BenchmarkSampleEndToEnd reports, for 2D 32² and a 16-site ring, the
// sample stage's wall time per measured lane-update (cold cache, the
// study's chunks, thermalization counted as overhead) on 1 and on 2
// workers, the same chains' kernel time (sampler.SectorLanes directly,
// thermalization 0, one core) per lane-update, their ratio, and the
// speed-up of 2 workers over 1.
func BenchmarkSampleEndToEnd(b *testing.B) {
	for _, c := range []struct {
		name, study string
		d, l        int
	}{
		{"2D_L32", "[model]\ndimension = 2\nsizes = [32]\nbetas = [0.3]\n[sample]\nsweeps = 1024\nchunk_sweeps = 1024\n", 2, 32},
		{"ring16", "[model]\ndimension = 1\nsizes = [16]\nbetas = [0.5]\n[sample]\nsweeps = 40000\nchunk_sweeps = 10000\n", 1, 16},
	} {
		b.Run(c.name, func(b *testing.B) {
			st, err := ParseStudy("bench.toml", []byte(c.study), nil)
			if err != nil {
				b.Fatal(err)
			}
			lat, _ := lattice.New(c.d, c.l)
			sectors := len(ratio.Sectors(ratio.Insertion, lat.N))
			updates := float64(sectors) * float64(st.Sample.Sweeps.Top()) * float64(lat.N) * sampler.Lanes
			timeWith := func(jobs int) float64 {
				cc, _ := cache.Open(filepath.Join(b.TempDir(), "c"))
				start := time.Now()
				if err := (&Runner{Cache: cc, Jobs: jobs, Only: map[string]bool{"sample": true}}).Run(BuildPlan(st)); err != nil {
					b.Fatal(err)
				}
				return time.Since(start).Seconds()
			}
			for i := 0; i < b.N; i++ {
				start := time.Now()
				for _, m := range ratio.Sectors(ratio.Insertion, lat.N) {
					for k := 0; k < st.Chunks(); k++ {
						ch := sampler.Chain{Lat: lat, Beta: st.Model.Betas[0], M: m, Sweeps: st.Sample.ChunkSweeps, Seed: uint64(k)}
						if _, err := sampler.SectorLanes(ch, st.Sample.BlockSweeps); err != nil {
							b.Fatal(err)
						}
					}
				}
				kernel := time.Since(start).Seconds()
				t1, t2 := timeWith(1), timeWith(2)
				b.ReportMetric(kernel/updates*1e9, "kernel-ns/lane-update")
				b.ReportMetric(t1/updates*1e9, "e2e-ns/lane-update")
				b.ReportMetric(t1/kernel, "e2e/kernel")
				b.ReportMetric(t1/t2, "jobs2-speedup")
			}
		})
	}
}

// BenchmarkGridRerun times `strata run` of a 2D 32² study (β = 0.3, 1001
// θ points) after only the θ grid changed, the cache warm: transform,
// scaling, CSV files, figures and report. It reports the median of three
// reruns (each with a new θ_max) and the first, cold run's time.
func BenchmarkGridRerun(b *testing.B) {
	dir := b.TempDir()
	study := filepath.Join(dir, "grid.toml")
	if err := os.WriteFile(study, []byte("name = \"grid\"\n[model]\ndimension = 2\nsizes = [32]\nbetas = [0.3]\n[sample]\nsweeps = 2048\n[transform]\ntheta_points = 1001\n"), 0o644); err != nil {
		b.Fatal(err)
	}
	out, cacheDir := filepath.Join(dir, "out"), filepath.Join(dir, "cache")
	run := func(thetaMax string) float64 {
		start := time.Now()
		if code := Main([]string{"run", study, "--out", out, "--cache", cacheDir, "--set", "transform.theta_max=" + thetaMax}, io.Discard, io.Discard); code != 0 {
			b.Fatalf("run exit %d", code)
		}
		return time.Since(start).Seconds()
	}
	cold := run("0.5")
	for i := 0; i < b.N; i++ {
		var ts []float64
		for k, tm := range []string{"0.45", "0.4", "0.35"} {
			ts = append(ts, run(tm+fmt.Sprint(i*3+k+1)))
		}
		sort.Float64s(ts)
		b.ReportMetric(ts[1], "median-rerun-s")
		b.ReportMetric(cold, "cold-s")
	}
}
