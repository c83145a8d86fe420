package analysis

import (
	"math"
	"testing"

	"strata/stages/rng"
)

func ar1(n int, phi float64, seed uint64) []float64 {
	r := rng.NewRand(seed)
	x := make([]float64, n)
	v := r.Norm() / math.Sqrt(1-phi*phi) // stationary start
	for i := range x {
		v = phi*v + r.Norm()
		x[i] = v
	}
	return x
}

// For an AR(1) process x_t = φ x_{t−1} + ε_t the normalized autocorrelation
// is φ^t, so τ_int = ½ + Σ_{t≥1} φ^t = (1+φ)/(2(1−φ)) (exact; see A. D.
// Sokal and N. Madras, J. Stat. Phys. 50, 109 (1988) for the definition).
func TestGammaAR1Tau(t *testing.T) {
	for i, phi := range []float64{0, 0.5, 0.8, 0.95} {
		x := ar1(200000, phi, uint64(10+i))
		r := Gamma([][]float64{x}, DefaultS)
		want := (1 + phi) / (2 * (1 - phi))
		if math.Abs(r.Tau-want) > 3*r.TauErr+0.02 {
			t.Errorf("φ=%v: τ_int = %v ± %v, exact %v", phi, r.Tau, r.TauErr, want)
		}
	}
}

// Coverage: over 400 independent AR(1) series with true mean 0, the
// interval mean ± err contains 0 in 68.3% of cases; accept 62–75% (the
// binomial 99% band is about ±6%).
func TestGammaCoverage(t *testing.T) {
	hits := 0
	const runs = 400
	for s := 0; s < runs; s++ {
		x := ar1(4000, 0.7, uint64(1000+s))
		// split into two replicas to exercise the multi-replica path
		r := Gamma([][]float64{x[:2500], x[2500:]}, DefaultS)
		if math.Abs(r.Mean) <= r.Err {
			hits++
		}
	}
	frac := float64(hits) / runs
	if frac < 0.62 || frac > 0.75 {
		t.Errorf("1σ coverage %.3f, want ≈ 0.683", frac)
	}
}

func TestGammaConstantSeries(t *testing.T) {
	r := Gamma([][]float64{{2, 2, 2}, {2, 2}}, DefaultS)
	if r.Err != 0 || r.Mean != 2 || r.Tau != 0.5 {
		t.Errorf("constant series: %+v", r)
	}
}
