// Package analysis estimates means and their statistical errors from
// autocorrelated Monte Carlo series.
package analysis

import "math"

// Result is a mean with its error from the Γ-method.
type Result struct {
	Mean   float64
	Err    float64 // standard error of Mean, autocorrelation included
	Tau    float64 // integrated autocorrelation time τ_int, in measurements
	TauErr float64 // δτ_int ≈ τ_int √((4W+2)/n)
	Window int     // summation window W
	N      int     // total number of measurements
}

// DefaultS is the window parameter S of the automatic windowing procedure
// (U. Wolff, Comput. Phys. Commun. 156, 143 (2004), who recommends 1 ≤ S ≤ 2).
const DefaultS = 1.5

// Gamma applies the Γ-method with automatic windowing (U. Wolff, Comput.
// Phys. Commun. 156, 143 (2004)) to one observable measured on several
// independent replicas (chains) of the same process. With ā the mean over
// all n = Σ n_r measurements,
//
//	Γ(t) = Σ_r Σ_i (a_{r,i} − ā)(a_{r,i+t} − ā) / Σ_r (n_r − t),
//	τ_int(W) = ½ + Σ_{t=1}^{W} Γ(t)/Γ(0),
//
// W is the first window with g(W) = e^{−W/τ(W)} − τ(W)/√(W n) < 0,
// τ(W) = S / ln[(2τ_int(W)+1)/(2τ_int(W)−1)]. The variance of ā is
// σ² = 2τ_int Γ(0)/n with Wolff's bias correction factor 1 + (2W+1)/n.
// A series with Γ(0) = 0 has Err exactly 0 and τ_int = ½.
func Gamma(reps [][]float64, s float64) Result {
	n, sum := 0, 0.0
	for _, r := range reps {
		n += len(r)
		for _, x := range r {
			sum += x
		}
	}
	if n == 0 {
		return Result{Mean: math.NaN(), Err: math.NaN(), Tau: math.NaN()}
	}
	mean := sum / float64(n)
	gammaAt := func(t int) float64 {
		acc, cnt := 0.0, 0
		for _, r := range reps {
			for i := 0; i+t < len(r); i++ {
				acc += (r[i] - mean) * (r[i+t] - mean)
			}
			if len(r) > t {
				cnt += len(r) - t
			}
		}
		if cnt == 0 {
			return 0
		}
		return acc / float64(cnt)
	}
	g0 := gammaAt(0)
	res := Result{Mean: mean, Tau: 0.5, N: n}
	if g0 <= 0 || allEqual(reps) {
		return res
	}
	cf := g0 // Γ(0) + 2 Σ_{t≤W} Γ(t)
	w := 0
	maxW := n / 2
	for t := 1; t <= maxW; t++ {
		cf += 2 * gammaAt(t)
		w = t
		tauInt := cf / (2 * g0)
		var tau float64
		if tauInt <= 0.5 {
			tau = 1e-300
		} else {
			tau = s / math.Log((2*tauInt+1)/(2*tauInt-1))
		}
		g := math.Exp(-float64(t)/tau) - tau/math.Sqrt(float64(t*n))
		if g < 0 {
			break
		}
	}
	cf *= 1 + float64(2*w+1)/float64(n)
	if cf < 0 {
		cf = 0
	}
	res.Window = w
	res.Tau = cf / (2 * g0)
	res.Err = math.Sqrt(cf / float64(n))
	res.TauErr = res.Tau * math.Sqrt(float64(4*w+2)/float64(n))
	return res
}

func allEqual(reps [][]float64) bool {
	var first float64
	seen := false
	for _, r := range reps {
		for _, x := range r {
			if !seen {
				first, seen = x, true
			} else if x != first {
				return false
			}
		}
	}
	return true
}

// StdDev returns the sample standard deviation √(Σ(x−x̄)²/(n−1)); a
// constant sample gives exactly 0 (not a rounding residue), fewer than two
// values give 0.
func StdDev(x []float64) float64 {
	if len(x) < 2 {
		return 0
	}
	m := 0.0
	constant := true
	for _, v := range x {
		m += v
		constant = constant && v == x[0]
	}
	if constant {
		return 0
	}
	m /= float64(len(x))
	s := 0.0
	for _, v := range x {
		s += (v - m) * (v - m)
	}
	return math.Sqrt(s / float64(len(x)-1))
}
