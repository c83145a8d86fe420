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
}

// Budget predicts the sweeps per sector S* at which |sign(X)| = f·σ(X):
// the error of a Monte Carlo sign falls as 1/√S, so
// S* = S·(f·σ(X)/|sign(X)|)². Beyond the reach sign(X) itself is noise: an
// exact value is used when given (pass NaN otherwise), else the measured
// sign inside the reach, else the Gaussian extrapolation
// −ln|sign| ≈ N χ θ²/2 with χ fitted by least squares on the grid points in
// (0, reach] outside the zero bracket (lo, hi). σ(X) is interpolated
// linearly in ln σ between grid points.
func Budget(c *Curve, n int, reach, lo, hi, x, sweeps, factor, exactSign float64) (Prediction, error) {
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
	r := factor * p.Sigma / p.Sign
	p.Sweeps = sweeps * r * r
	return p, nil
}
