package ratio_test

import (
	"math"
	"sort"
	"testing"
	"time"

	"strata/stages/lattice"
	"strata/stages/ratio"
	"strata/stages/sampler/baseline"
)

// BenchmarkEfficiency compares, on a 2D 16² lattice at β = 0.3 with the
// same sweeps per sector, the plain approach (package baseline, one core)
// with the insertion estimator (one core here; the pipeline adds the
// second): the reported metric is the median over sector pairs of
// (σ²·t)_plain / (σ²·t)_insertion, t the CPU time per ratio.
func BenchmarkEfficiency(b *testing.B) {
	const sweeps, beta = 4000, 0.3
	lat, _ := lattice.New(2, 16)
	n := lat.N
	for it := 0; it < b.N; it++ {
		start := time.Now()
		res, _ := estimate(b, ratio.Insertion, 2, 16, beta, 1000, sweeps/1000, 11)
		tIns := time.Since(start).Seconds() / float64(len(res.Ratios))
		var ratios []float64
		for i, q := range res.Ratios {
			if q.Err == 0 || i%8 != 2 {
				continue // top sectors are exact; sample every 8th pair
			}
			t0 := time.Now()
			x := baseline.Pair(lat, beta, q.M, 100, sweeps, uint64(q.M+n))
			tPlain := time.Since(t0).Seconds()
			_, e := baseline.LnRatio(x)
			ratios = append(ratios, e*e*tPlain/(q.Err*q.Err*tIns))
		}
		sort.Float64s(ratios)
		med := ratios[len(ratios)/2]
		if math.IsNaN(med) {
			b.Fatal("NaN efficiency")
		}
		b.ReportMetric(med, "efficiency-ratio")
	}
}

// BenchmarkEstimators reports, for each estimator on 2D 16² at β = 0.3, the
// median over sector pairs of the efficiency 1/(σ²·t) relative to the
// insertion estimator (t the CPU time per ratio, one core).
func BenchmarkEstimators(b *testing.B) {
	const beta = 0.3
	eff := map[string][]float64{}
	for it := 0; it < b.N; it++ {
		for i, est := range ratio.Estimators {
			start := time.Now()
			res, _ := estimate(b, est, 2, 16, beta, 1000, 4, uint64(21+i))
			t := time.Since(start).Seconds() / float64(len(res.Ratios))
			var e []float64
			for _, q := range res.Ratios {
				e = append(e, 1/(q.Err*q.Err*t))
			}
			eff[est] = e
		}
		for _, est := range ratio.Estimators {
			var rel []float64
			for i := range eff[est] {
				if !math.IsInf(eff[ratio.Insertion][i], 0) {
					rel = append(rel, eff[est][i]/eff[ratio.Insertion][i])
				}
			}
			sort.Float64s(rel)
			b.ReportMetric(rel[len(rel)/2], est+"/insertion")
		}
	}
}
