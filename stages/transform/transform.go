// Package transform turns ln ρ_β(M) into observables at imaginary field
// h = iθ (h = βH dimensionless, θ = Im h):
//
//	Z(β, iθ) = Σ_M ρ(M) cos(θM)             (real, since ρ(M) = ρ(−M)),
//	sign(θ)  = Z(β, iθ)/Z(β, 0)              (the average sign),
//	Im m(θ)  = Σ_M M ρ(M) sin(θM) / (N Z)    (per site; = −(1/N) ∂_θ ln Z),
//	Δf(θ)    = −ln|sign(θ)| / N              (per site).
//
// float64 suffices here: the sum cancels to |sign|·Z(0), and the rounding
// error of a K-term sum of terms bounded by Z(0) is about K·2^−53 ≈ 1e−13 of
// Z(0) for K ~ 1000, far below the statistical error of a sampled ρ
// (relative 1e−3 or more per ratio, which spreads to ≥ 1e−4 of Z(0)). Where
// the sign itself falls below ~1e−12 no float64 sum can be trusted; the
// exact references use package bigsum instead.
package transform

import (
	"math"
	"sort"
	"strata/stages/analysis"
)

// Table holds cos(θ_g M) and M sin(θ_g M) for M = M_1 > M_2 > … > 0 on a
// θ grid, shared by the central value and every replica.
type Table struct {
	N       int
	Theta   []float64
	Ms      []int     // positive magnetizations, N, N−2, …
	cos     []float64 // cos(θ_g M_k) at [g*K + k]
	msin    []float64 // M_k sin(θ_g M_k)
	hasZero bool      // N even: the M = 0 term appears once
}

// NewTable builds the tables by the rotation recurrence
// e^{iθ(M+2)} = e^{iθM}·e^{2iθ}, started from the smallest M; no math.Cos per
// term. The recurrence error grows like K·ε, about 1e−13 for K = 1000.
func NewTable(n int, theta []float64) *Table {
	t := &Table{N: n, Theta: theta, hasZero: n%2 == 0}
	for m := n; m > 0; m -= 2 {
		t.Ms = append(t.Ms, m)
	}
	k := len(t.Ms)
	t.cos = make([]float64, len(theta)*k)
	t.msin = make([]float64, len(theta)*k)
	for g, th := range theta {
		c2, s2 := math.Cos(2*th), math.Sin(2*th)
		m0 := 2 - n%2 // smallest positive M
		c, s := math.Cos(float64(m0)*th), math.Sin(float64(m0)*th)
		for j := k - 1; j >= 0; j-- { // Ms[k-1] = m0
			t.cos[g*k+j] = c
			t.msin[g*k+j] = float64(t.Ms[j]) * s
			c, s = c*c2-s*s2, s*c2+c*s2
		}
	}
	return t
}

// Values holds sign and Im m on the grid for one ln ρ.
type Values struct {
	Sign, ImM []float64
}

// weights returns w(M) = ρ(M)/ρ_max for M in t.Ms and the M = 0 weight.
func (t *Table) weights(lnRho []float64) (w []float64, w0 float64) {
	n := t.N
	top := math.Inf(-1)
	for _, v := range lnRho {
		top = math.Max(top, v)
	}
	w = make([]float64, len(t.Ms))
	for j, m := range t.Ms {
		w[j] = math.Exp(lnRho[(m+n)/2] - top)
	}
	if t.hasZero {
		w0 = math.Exp(lnRho[n/2] - top)
	}
	return w, w0
}

// Eval computes sign(θ) and Im m(θ) on the grid from ln ρ (index (M+N)/2).
func (t *Table) Eval(lnRho []float64) Values { return t.EvalMany([][]float64{lnRho})[0] }

// replicaBlock is how many ln ρ vectors share one pass over the table: the
// table (2·G·K floats, 32 MB at G = 1001, K = 2048) is far larger than the
// caches, so each row is reused for a block of weight vectors while it is
// cached (a block of 16 at K = 2048 is 256 KB).
const replicaBlock = 16

// EvalMany computes sign and Im m for several ln ρ; the results are those
// of Eval applied one by one (the same operations in the same order).
func (t *Table) EvalMany(lnRhos [][]float64) []Values {
	k := len(t.Ms)
	out := make([]Values, len(lnRhos))
	ws := make([][]float64, len(lnRhos))
	w0s := make([]float64, len(lnRhos))
	z0s := make([]float64, len(lnRhos))
	for r, lr := range lnRhos {
		w, w0 := t.weights(lr)
		z0 := w0
		for _, x := range w {
			z0 += 2 * x
		}
		ws[r], w0s[r], z0s[r] = w, w0, z0
		out[r] = Values{Sign: make([]float64, len(t.Theta)), ImM: make([]float64, len(t.Theta))}
	}
	n := float64(t.N)
	for lo := 0; lo < len(lnRhos); lo += replicaBlock {
		hi := min(lo+replicaBlock, len(lnRhos))
		for g := range t.Theta {
			rowC, rowS := t.cos[g*k:(g+1)*k], t.msin[g*k:(g+1)*k]
			for r := lo; r < hi; r++ {
				zc, zs := dot2(ws[r], rowC, rowS)
				z := w0s[r] + 2*zc
				out[r].Sign[g] = z / z0s[r]
				out[r].ImM[g] = 2 * zs / (z * n)
			}
		}
	}
	return out
}

// dot2 returns a·b and a·c in one pass over a.
func dot2(a, b, c []float64) (float64, float64) {
	b, c = b[:len(a)], c[:len(a)]
	var s0, s1, t0, t1 float64
	i := 0
	for ; i+2 <= len(a); i += 2 {
		a0, a1 := a[i], a[i+1]
		s0 += a0 * b[i]
		s1 += a1 * b[i+1]
		t0 += a0 * c[i]
		t1 += a1 * c[i+1]
	}
	for ; i < len(a); i++ {
		s0 += a[i] * b[i]
		t0 += a[i] * c[i]
	}
	return s0 + s1, t0 + t1
}

// SignAt returns sign(θ) at one θ by a direct sum (for root finding).
func SignAt(n int, lnRho []float64, theta float64) float64 {
	return directSum(n, lnRho, func(m float64) float64 { return math.Cos(theta * m) })
}

// SignSlope returns d sign/dθ = −Σ_M M ρ(M) sin(θM) / Z(0) at one θ.
func SignSlope(n int, lnRho []float64, theta float64) float64 {
	return directSum(n, lnRho, func(m float64) float64 { return -m * math.Sin(theta*m) })
}

// directSum returns Σ_M ρ(M) f(M) / Σ_M ρ(M), with ρ scaled by its
// largest value.
func directSum(n int, lnRho []float64, f func(m float64) float64) float64 {
	top := math.Inf(-1)
	for _, v := range lnRho {
		top = math.Max(top, v)
	}
	s, z0 := 0.0, 0.0
	for k, v := range lnRho {
		w := math.Exp(v - top)
		s += w * f(float64(2*k-n))
		z0 += w
	}
	return s / z0
}

// Curve is the transform of a central ln ρ with errors from replicas.
type Curve struct {
	Theta                   []float64
	Sign, SignErr           []float64
	ImM, ImMErr             []float64
	DeltaF, DeltaFErr       []float64
	ReplicaSign, ReplicaImM [][]float64 // [replica][grid]
}

// Sum is one representation's sum over sectors on a θ grid: the Fourier
// sum over magnetizations (Table) or the dual sum over monomer numbers
// (DualTable). lnW is that representation's log density: ln ρ(M) or
// ln D(n) − ln D(0).
type Sum interface {
	Sites() int
	Grid() []float64
	EvalMany(lnW [][]float64) []Values
	SignAt(lnW []float64, theta float64) float64
}

// Sites returns N.
func (t *Table) Sites() int { return t.N }

// Grid returns the θ grid.
func (t *Table) Grid() []float64 { return t.Theta }

// SignAt is the package's SignAt for this table's N.
func (t *Table) SignAt(lnRho []float64, theta float64) float64 { return SignAt(t.N, lnRho, theta) }

// Evaluate transforms the central log density and each replica; errors are
// the standard deviations over replicas.
func Evaluate(t Sum, central []float64, replicas [][]float64) *Curve {
	c := &Curve{Theta: t.Grid()}
	v := t.EvalMany([][]float64{central})[0]
	c.Sign, c.ImM = v.Sign, v.ImM
	g := len(c.Theta)
	c.SignErr = make([]float64, g)
	c.ImMErr = make([]float64, g)
	c.DeltaF = make([]float64, g)
	c.DeltaFErr = make([]float64, g)
	for _, rv := range t.EvalMany(replicas) {
		c.ReplicaSign = append(c.ReplicaSign, rv.Sign)
		c.ReplicaImM = append(c.ReplicaImM, rv.ImM)
	}
	n := float64(t.Sites())
	col := make([]float64, len(replicas))
	for i := 0; i < g; i++ {
		c.DeltaF[i] = -math.Log(math.Abs(c.Sign[i])) / n
		if len(replicas) < 2 {
			continue
		}
		for j := range replicas {
			col[j] = c.ReplicaSign[j][i]
		}
		c.SignErr[i] = analysis.StdDev(col)
		for j := range replicas {
			col[j] = -math.Log(math.Abs(c.ReplicaSign[j][i])) / n
		}
		c.DeltaFErr[i] = analysis.StdDev(col)
		for j := range replicas {
			col[j] = c.ReplicaImM[j][i]
		}
		c.ImMErr[i] = analysis.StdDev(col)
	}
	return c
}

// Zero is the first Lee–Yang zero on the grid.
type Zero struct {
	Resolved       bool
	Value, Err     float64
	Lo, Hi         float64 // bracket (θ_a, θ_b) on the grid
	ReplicaRoots   []float64
	SingleCrossing float64 // fraction of replicas with one sign change in the bracket
}

// FirstZero locates the first zero of the central sign. θ_a is the last grid
// point before its first sign change with sign/σ ≥ +2, θ_b the first grid
// point after it with sign/σ ≤ −2. The zero is resolved when both exist and
// at least minFrac of the replicas change sign exactly once on the grid
// points in [θ_a, θ_b]; its value is the bisection root of the central
// reconstruction, its error the 68% half-width of the replicas' roots. A
// later zero is never reported in place of an unresolved first one. s is
// the representation the curve came from.
func FirstZero(c *Curve, s Sum, central []float64, replicas [][]float64, minFrac float64) Zero {
	var z Zero
	first := -1
	for i := 1; i < len(c.Theta); i++ {
		if c.Sign[i-1] > 0 && c.Sign[i] <= 0 {
			first = i
			break
		}
	}
	if first < 0 {
		return z
	}
	a, b := -1, -1
	for i := first - 1; i >= 0; i-- {
		if c.SignErr[i] >= 0 && c.Sign[i] >= 2*c.SignErr[i] {
			a = i
			break
		}
	}
	for i := first; i < len(c.Theta); i++ {
		if c.Sign[i] <= -2*c.SignErr[i] {
			b = i
			break
		}
	}
	if a < 0 || b < 0 {
		return z
	}
	z.Lo, z.Hi = c.Theta[a], c.Theta[b]
	single := 0
	for j := range c.ReplicaSign {
		changes := 0
		for i := a + 1; i <= b; i++ {
			if (c.ReplicaSign[j][i-1] > 0) != (c.ReplicaSign[j][i] > 0) {
				changes++
			}
		}
		if changes == 1 {
			single++
			z.ReplicaRoots = append(z.ReplicaRoots, RootOf(s, replicas[j], z.Lo, z.Hi))
		}
	}
	if len(c.ReplicaSign) > 0 {
		z.SingleCrossing = float64(single) / float64(len(c.ReplicaSign))
	}
	if len(c.ReplicaSign) == 0 || z.SingleCrossing < minFrac {
		return z
	}
	z.Resolved = true
	z.Value = RootOf(s, central, z.Lo, z.Hi)
	z.Err = halfWidth68(z.ReplicaRoots)
	return z
}

// Root returns the zero of sign(θ) in [lo, hi] by bisection on the direct
// sum SignAt; the sign must differ at the two ends.
func Root(n int, lnRho []float64, lo, hi float64) float64 {
	return bisect(func(th float64) float64 { return SignAt(n, lnRho, th) }, lo, hi)
}

// RootOf is Root for any representation.
func RootOf(s Sum, lnW []float64, lo, hi float64) float64 {
	return bisect(func(th float64) float64 { return s.SignAt(lnW, th) }, lo, hi)
}

func bisect(sign func(float64) float64, lo, hi float64) float64 {
	flo := sign(lo)
	for it := 0; it < 200 && hi-lo > 1e-15*math.Max(1, hi); it++ {
		mid := (lo + hi) / 2
		fm := sign(mid)
		if (fm > 0) == (flo > 0) {
			lo, flo = mid, fm
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2
}

// FirstRoot returns the first zero of sign(θ) on a grid where the sampled
// sign goes from positive to non-positive, refined by Root; NaN if the
// sign never changes there.
func FirstRoot(n int, lnRho, theta, sign []float64) float64 {
	for i := 1; i < len(theta); i++ {
		if sign[i-1] > 0 && sign[i] <= 0 {
			return Root(n, lnRho, theta[i-1], theta[i])
		}
	}
	return math.NaN()
}

// halfWidth68 returns half the distance between the 16th and 84th
// percentiles (the 68% central interval).
func halfWidth68(x []float64) float64 {
	if len(x) < 2 {
		return math.NaN()
	}
	s := append([]float64(nil), x...)
	sort.Float64s(s)
	q := func(p float64) float64 {
		pos := p * float64(len(s)-1)
		i := int(pos)
		if i+1 >= len(s) {
			return s[len(s)-1]
		}
		f := pos - float64(i)
		return s[i]*(1-f) + s[i+1]*f
	}
	return (q(0.84) - q(0.16)) / 2
}

// Reach returns the largest grid θ up to which |sign| ≥ factor·σ_sign,
// ignoring the bracket (lo, hi) of a resolved zero (pass lo = hi = NaN for
// none), and whether the sign never fell below the noise (then the reach is
// only a lower bound: the grid's end).
func Reach(c *Curve, factor, lo, hi float64) (reach float64, lowerBound bool) {
	reach = math.NaN()
	for i, th := range c.Theta {
		if th > lo && th < hi {
			continue
		}
		if math.Abs(c.Sign[i]) < factor*c.SignErr[i] {
			return reach, false
		}
		reach = th
	}
	return reach, true
}
