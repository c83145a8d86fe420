// Package fss fits the finite-size scaling of the first Lee–Yang zero,
//
//	θ₁(L) = θ_c + a·L^{−y}  (+ b·L^{−2y} with the correction term),
//
// by weighted least squares, χ² = Σ_L ((θ₁(L) − model)/σ_L)².
package fss

import (
	"errors"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

// Point is one size's first zero.
type Point struct {
	L          int
	Theta, Err float64
}

// Fit is a fitted scaling law.
type Fit struct {
	ThetaC, A, B, Y float64
	Chi2            float64
	Dof             int
}

// ErrTooFew means fewer points than parameters + 1.
var ErrTooFew = errors.New("fss: fewer sizes than fit parameters + 1")

// Params returns the number of fit parameters.
func Params(freeY, correction bool) int {
	k := 2
	if correction {
		k++
	}
	if freeY {
		k++
	}
	return k
}

// linear solves the weighted linear least-squares problem for fixed y and
// returns (θ_c, a, b) and χ².
func linear(pts []Point, y float64, correction bool) (coef []float64, chi2 float64) {
	k := 2
	if correction {
		k = 3
	}
	n := len(pts)
	A := mat.NewDense(n, k, nil)
	rhs := mat.NewVecDense(n, nil)
	for i, p := range pts {
		w := 1 / p.Err
		x := math.Pow(float64(p.L), -y)
		A.Set(i, 0, w)
		A.Set(i, 1, w*x)
		if correction {
			A.Set(i, 2, w*x*x)
		}
		rhs.SetVec(i, w*p.Theta)
	}
	var sol mat.VecDense
	if err := sol.SolveVec(A, rhs); err != nil {
		return nil, math.Inf(1)
	}
	coef = make([]float64, k)
	for j := range coef {
		coef[j] = sol.AtVec(j)
	}
	for i, p := range pts {
		x := math.Pow(float64(p.L), -y)
		m := coef[0] + coef[1]*x
		if correction {
			m += coef[2] * x * x
		}
		r := (p.Theta - m) / p.Err
		chi2 += r * r
		_ = i
	}
	return coef, chi2
}

// Solve fits the points. With freeY the exponent is found by minimizing the
// profile χ²(y) (the linear parameters solved exactly at each y) with
// gonum's Nelder–Mead, started at y0; otherwise y = y0.
func Solve(pts []Point, y0 float64, freeY, correction bool) (Fit, error) {
	k := Params(freeY, correction)
	if len(pts) < k+1 {
		return Fit{}, ErrTooFew
	}
	y := y0
	if freeY {
		prob := optimize.Problem{Func: func(x []float64) float64 {
			if x[0] <= 0.05 || x[0] > 20 {
				return math.Inf(1)
			}
			_, c := linear(pts, x[0], correction)
			return c
		}}
		res, err := optimize.Minimize(prob, []float64{y0}, &optimize.Settings{Converger: &optimize.FunctionConverge{Absolute: 1e-14, Iterations: 200}}, &optimize.NelderMead{})
		if err != nil && res == nil {
			return Fit{}, err
		}
		y = res.X[0]
	}
	coef, chi2 := linear(pts, y, correction)
	if coef == nil {
		return Fit{}, errors.New("fss: singular fit")
	}
	f := Fit{ThetaC: coef[0], A: coef[1], Y: y, Chi2: chi2, Dof: len(pts) - k}
	if correction {
		f.B = coef[2]
	}
	return f, nil
}
