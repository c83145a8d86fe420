package stages

import (
	"encoding/json"
	"math"
	"testing"

	"strata/stages/exact"
	"strata/stages/polyfit"
	"strata/stages/transform"
)

// Smoothing the exact ring density of states (domain count, PHYSICS.md):
// a low-degree polynomial moves the first zero away from the exact one
// (closed form) by more than 1%, the full degree reproduces it.
func TestFitBiasOnExactDensity(t *testing.T) {
	for _, target := range []string{polyfit.LnRho, polyfit.LnRatio} {
		n, beta := 16, 0.5
		lr := exact.RingLnRho(n, beta)
		s := StitchOut{D: 1, N: n, Beta: beta, LnRho: lr, LnRhoErr: make([]float64, n+1)}
		for m := n; m > 1; m -= 2 {
			s.M = append(s.M, m)
			s.LnRatio = append(s.LnRatio, lr[(m+n)/2]-lr[(m-2+n)/2])
			s.LnRatioErr = append(s.LnRatioErr, 0)
			s.Tau = append(s.Tau, 0.5)
		}
		in, _ := json.Marshal(s)
		full := n // ln ρ: N/2+1 even powers through x^N; ln r: N/2 odd powers through x^(N−1)
		if target == polyfit.LnRatio {
			full = n - 1
		}
		b, err := Fit(target, []int{2, full}).Run([][]byte{in})
		if err != nil {
			t.Fatal(err)
		}
		var f FitOut
		json.Unmarshal(b, &f)
		want := exact.RingFirstZero(n, beta)
		grid := TransformParams{ThetaMin: 0, ThetaMax: 0.8, Points: 161}.Grid()
		tab := transform.NewTable(n, grid)
		raw := transform.Evaluate(tab, lr, nil)
		curves := fitCurves(&f, tab, raw, n)
		low, high := float64(curves[0].FirstZero), float64(curves[1].FirstZero)
		if !(math.Abs(low-want) > 0.01*want) {
			t.Errorf("%s degree 2: first zero %v, exact %v: expected a bias above 1%%", target, low, want)
		}
		if math.Abs(high-want) > 1e-6 {
			t.Errorf("%s degree %d: first zero %v, exact %v", target, full, high, want)
		}
	}
}

// On noisy data the bias onset of a poor fit is found inside the grid, and
// it is where the smoothed Im m leaves the raw one by more than 2σ.
func TestFitBiasOnsetOnNoisyData(t *testing.T) {
	st, tr := runBranch(t, 1, 12, 0.5, 4, 1000, 5, TransformParams{ThetaMax: 0.6, Points: 61, ReachFactor: 2, ZeroFraction: 0.95, MaxBits: 4096})
	in, _ := json.Marshal(st)
	b, err := Fit(polyfit.LnRho, []int{2}).Run([][]byte{in})
	if err != nil {
		t.Fatal(err)
	}
	var f FitOut
	json.Unmarshal(b, &f)
	tab := transform.NewTable(st.N, tr.Theta)
	raw := &transform.Curve{Theta: tr.Theta, ImM: Floats(tr.ImM), ImMErr: Floats(tr.ImMErr)}
	c := fitCurves(&f, tab, raw, st.N)[0]
	onset := float64(c.BiasOnset)
	if math.IsNaN(onset) {
		t.Fatal("no bias onset for a degree-2 fit")
	}
	for i, th := range tr.Theta {
		d := math.Abs(float64(c.ImM[i]) - raw.ImM[i])
		if th < onset && d > 2*raw.ImMErr[i] {
			t.Errorf("θ=%v before the onset %v already differs by %v > 2σ", th, onset, d)
		}
		if th == onset && !(d > 2*raw.ImMErr[i]) {
			t.Errorf("at the onset θ=%v the difference %v is within 2σ = %v", th, d, 2*raw.ImMErr[i])
		}
	}
}
