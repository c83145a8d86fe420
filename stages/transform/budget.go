package transform

import (
	"fmt"
	"math"
)

// Prediction is the statistics needed to push the reach to θ = X.
type Prediction struct {
	Theta   float64 // X
	Sweeps  float64 // predicted measured sweeps per sector
	Sign    float64 // |sign(X)| used
	Sigma   float64 // σ_sign(X) measured with the current sweeps
	Source  string  // "exact", "measured" or "extrapolated"
	Chi     float64 // fitted χ in −ln|sign| ≈ Nχθ²/2 (extrapolated only)
	Factor  float64 // reach factor f
	Current float64 // current sweeps per sector
	// Probability is the fraction of independent runs with Sweeps sweeps
	// expected to reach X; Z the matching normal quantile.
	Probability, Z float64
}

// BudgetInput is what Budget needs besides the measured curve.
type BudgetInput struct {
	N           int
	Reach       float64 // reach of the measured curve
	Lo, Hi      float64 // zero bracket (NaN when none)
	Zero        float64 // the first zero: exact where known, else resolved (NaN when none)
	X           float64 // target θ
	Sweeps      float64 // sweeps per sector of the measured curve (the pilot)
	Factor      float64 // reach factor f
	ExactSign   float64 // sign(X) exactly, NaN when unknown
	Probability float64 // wanted fraction of runs reaching X, in (0, 1)
}

// Budget predicts the sweeps per sector S* at which a fraction P of
// independent runs reach θ = X. A run's measured sign at X is ŝ ~ N(s, σ)
// with σ ∝ 1/√S (the pilot's σ(X) at its S₀ sweeps), and it reaches X when
// |ŝ| ≥ f·σ, so P = Φ(s/σ − f) and
//
//	S* = S₀·(σ₀(X)·(f + z_P)/|s|)²,  z_P = Φ⁻¹(P)
//
// (P = 0.5 is the point where the expected |sign| is exactly the
// threshold; the grid points below X must reach too, which the monotone
// decrease of |sign| below the first zero ensures). Targets at or beyond
// the first zero are refused: there the reach depends on where grid points
// fall. sign(X) is exact when given, else measured inside the reach, else
// the Gaussian extrapolation −ln|sign| ≈ N χ θ²/2 with χ fitted by least
// squares on the grid points in (0, reach] outside the zero bracket. σ(X) is
// interpolated linearly in ln σ between grid points.
func Budget(c *Curve, in BudgetInput) (Prediction, error) {
	n, reach, lo, hi, x, sweeps, factor, exactSign := in.N, in.Reach, in.Lo, in.Hi, in.X, in.Sweeps, in.Factor, in.ExactSign
	if !(in.Probability > 0 && in.Probability < 1) {
		return Prediction{}, fmt.Errorf("success probability %v must lie in (0, 1)", in.Probability)
	}
	if x >= in.Zero {
		return Prediction{}, fmt.Errorf("θ = %v is at or beyond the first zero %.6g: the reach there depends on where the grid points fall; give a target below the zero", x, in.Zero)
	}
	p := Prediction{Theta: x, Factor: factor, Current: sweeps}
	th := c.Theta
	if x < th[0] || x > th[len(th)-1] {
		return p, fmt.Errorf("θ = %v is outside the grid [%v, %v]", x, th[0], th[len(th)-1])
	}
	i := 0
	for i+1 < len(th)-1 && th[i+1] < x {
		i++
	}
	f := 0.0
	if th[i+1] > th[i] {
		f = (x - th[i]) / (th[i+1] - th[i])
	}
	p.Sigma = math.Exp((1-f)*math.Log(c.SignErr[i]) + f*math.Log(c.SignErr[i+1]))
	switch {
	case !math.IsNaN(exactSign):
		p.Sign, p.Source = math.Abs(exactSign), "exact"
	case x <= reach:
		p.Sign, p.Source = math.Abs((1-f)*c.Sign[i]+f*c.Sign[i+1]), "measured"
	default:
		num, den := 0.0, 0.0
		for k, t := range th {
			if t <= 0 || t > reach || (t > lo && t < hi) || c.Sign[k] <= 0 {
				continue
			}
			y := -math.Log(c.Sign[k])
			num += y * t * t
			den += t * t * t * t
		}
		if den == 0 {
			return p, fmt.Errorf("no grid points inside the reach to extrapolate the sign from")
		}
		p.Chi = 2 * num / den / float64(n)
		p.Sign, p.Source = math.Exp(-float64(n)*p.Chi*x*x/2), "extrapolated"
	}
	if !(p.Sigma > 0) || !(p.Sign > 0) {
		return p, fmt.Errorf("cannot predict: sign %v, σ %v at θ = %v", p.Sign, p.Sigma, x)
	}
	p.Probability = in.Probability
	p.Z = math.Sqrt2 * math.Erfinv(2*in.Probability-1)
	r := (factor + p.Z) * p.Sigma / p.Sign
	p.Sweeps = sweeps * r * r
	return p, nil
}
