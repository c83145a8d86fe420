package transform

import "math"

// DualTable evaluates the dual (high-temperature, monomer) form of the
// average sign on a θ grid (0 ≤ θ ≤ π/2):
//
//	sign(θ)  = Σ_n (−1)^{n/2} (D(n)/D(0)) cos^{N−n}θ sinⁿθ,
//	Im m(θ)  = −(1/N) sign′(θ)/sign(θ),
//	sign′(θ) = Σ_n (−1)^{n/2} (D(n)/D(0)) cos^{N−n}θ sinⁿθ · (n cot θ − (N−n) tan θ),
//
// n = 0, 2, …, ≤ N the number of odd-degree sites (expansion e^{iθs} =
// cos θ (1 + i s tan θ); R. B. Griffiths, C. A. Hurst, S. Sherman, J. Math.
// Phys. 11, 790 (1970), from memory). Its input lnD holds ln D(n) − ln D(0)
// at index n/2.
//
// Unlike the Fourier sum its terms are not bounded by the result at θ = 0:
// Σ_n |term_n| = (cos 2θ)^{N/2} Z(h)/Z(0) with tanh h = tan θ (θ < π/4),
// against Z(0) for the Fourier sum, so at small θ its cancellation is
// e^{N(χ−1)θ²} against e^{Nχθ²/2} (χ per site): milder at high
// temperature, harsher near T_c. Each term is evaluated as
// exp(ln D + (N−n) ln cos θ + n ln sin θ − max) in float64, without
// overflow at any N; the rounding of the sum is about 2^−53 of Σ|term_n|.
type DualTable struct {
	N     int
	Theta []float64
	lnC   []float64 // ln cos θ_g
	lnS   []float64 // ln sin θ_g (−Inf at θ = 0)
	cot   []float64
	tan   []float64
}

// NewDualTable prepares the dual sum for N sites on a θ grid in [0, π/2].
func NewDualTable(n int, theta []float64) *DualTable {
	t := &DualTable{N: n, Theta: theta}
	for _, th := range theta {
		c, s := math.Cos(th), math.Sin(th)
		t.lnC = append(t.lnC, math.Log(c))
		t.lnS = append(t.lnS, math.Log(s))
		t.cot = append(t.cot, c/s)
		t.tan = append(t.tan, s/c)
	}
	return t
}

// Sites returns N.
func (t *DualTable) Sites() int { return t.N }

// Grid returns the θ grid.
func (t *DualTable) Grid() []float64 { return t.Theta }

// mulLn returns k·x with 0·(−Inf) = 0 (a power x^0 = 1 even at x = 0).
func mulLn(k int, x float64) float64 {
	if k == 0 {
		return 0
	}
	return float64(k) * x
}

// at returns sign and Im m at grid point g (or at θ given by its logs and
// tangents), scaling the terms by their largest exponent; exps is scratch
// space of len(lnD).
func (t *DualTable) at(lnD []float64, lnC, lnS, cot, tan float64, exps []float64) (sign, imM float64) {
	n := t.N
	top := math.Inf(-1)
	for j, v := range lnD {
		e := v + mulLn(n-2*j, lnC) + mulLn(2*j, lnS)
		exps[j] = e
		top = math.Max(top, e)
	}
	var s, ds float64
	zeroAngle := math.IsInf(lnS, -1)
	for j := range lnD {
		w := math.Exp(exps[j] - top)
		if j%2 == 1 {
			w = -w
		}
		s += w
		if !zeroAngle {
			ds += w * (float64(2*j)*cot - float64(n-2*j)*tan)
		}
	}
	sign = s * math.Exp(top)
	if zeroAngle {
		return sign, 0
	}
	return sign, -ds / (float64(n) * s)
}

// EvalMany computes sign and Im m on the grid for each ln D vector.
func (t *DualTable) EvalMany(lnDs [][]float64) []Values {
	out := make([]Values, len(lnDs))
	for r, lnD := range lnDs {
		exps := make([]float64, len(lnD))
		v := Values{Sign: make([]float64, len(t.Theta)), ImM: make([]float64, len(t.Theta))}
		for g := range t.Theta {
			v.Sign[g], v.ImM[g] = t.at(lnD, t.lnC[g], t.lnS[g], t.cot[g], t.tan[g], exps)
		}
		out[r] = v
	}
	return out
}

// SignAt returns the dual sign at one θ.
func (t *DualTable) SignAt(lnD []float64, theta float64) float64 {
	c, s := math.Cos(theta), math.Sin(theta)
	sign, _ := t.at(lnD, math.Log(c), math.Log(s), c/s, s/c, make([]float64, len(lnD)))
	return sign
}
