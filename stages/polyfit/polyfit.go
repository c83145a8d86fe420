// Package polyfit smooths a measured density of states with a polynomial
// ansatz, the published idea that this tool makes inspectable: smoothing
// ln ρ biases the Fourier transform where the sign is small.
//
// Two targets, both in x = M/N:
//
//	ln_rho:   ln ρ(M) ≈ Σ_{j=0}^{k/2} c_j x^{2j}          (even, degree k)
//	ln_ratio: ln r(M) ≈ Σ_{j=0}^{(k−1)/2} c_j x'^{2j+1},  x' = (M−1)/N (odd)
//
// fitted by weighted least squares, χ² = Σ ((y − model)/σ)². A stitched
// ln ρ from the ln_ratio fit uses the same anchor ρ(±N) = e^{βdN}.
package polyfit

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Targets.
const (
	LnRho   = "ln_rho"
	LnRatio = "ln_ratio"
)

// Result is one fitted degree.
type Result struct {
	Degree int
	Coef   []float64
	Chi2   float64
	Dof    int
	AIC    float64   // χ² + 2·(number of parameters)
	Fitted []float64 // the model at the input abscissae
}

// Fit fits y(x) ± sigma with the powers x^p for p in powers. Points with
// sigma = 0 (exact values) get the smallest positive sigma of the data, a
// floor that keeps the design matrix well conditioned; when every sigma is
// 0 the fit is unweighted.
func Fit(x, y, sigma []float64, powers []int) (Result, error) {
	n, k := len(x), len(powers)
	if n < k {
		return Result{}, fmt.Errorf("polyfit: %d points for %d parameters", n, k)
	}
	minPos := math.Inf(1)
	for _, s := range sigma {
		if s > 0 && s < minPos {
			minPos = s
		}
	}
	w := make([]float64, n)
	for i, s := range sigma {
		switch {
		case s > 0:
			w[i] = 1 / s
		case math.IsInf(minPos, 1):
			w[i] = 1
		default:
			w[i] = 1 / minPos
		}
	}
	a := mat.NewDense(n, k, nil)
	b := mat.NewVecDense(n, nil)
	for i := range x {
		for j, p := range powers {
			a.Set(i, j, w[i]*math.Pow(x[i], float64(p)))
		}
		b.SetVec(i, w[i]*y[i])
	}
	var qr mat.QR
	qr.Factorize(a)
	var c mat.VecDense
	if err := qr.SolveVecTo(&c, false, b); err != nil {
		return Result{}, errors.New("polyfit: singular design matrix")
	}
	r := Result{Coef: make([]float64, k), Fitted: make([]float64, n), Dof: n - k}
	for j := range r.Coef {
		r.Coef[j] = c.AtVec(j)
	}
	for i := range x {
		v := 0.0
		for j, p := range powers {
			v += r.Coef[j] * math.Pow(x[i], float64(p))
		}
		r.Fitted[i] = v
		if sigma[i] > 0 {
			d := (y[i] - v) / sigma[i]
			r.Chi2 += d * d
		}
	}
	r.AIC = r.Chi2 + 2*float64(k)
	return r, nil
}

// Powers returns the powers of a target's polynomial of degree k.
func Powers(target string, k int) []int {
	var p []int
	for j := 0; j <= k; j++ {
		if (target == LnRho && j%2 == 0) || (target == LnRatio && j%2 == 1) {
			p = append(p, j)
		}
	}
	return p
}
