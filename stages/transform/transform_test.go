package transform

import (
	"math"
	"testing"

	"strata/stages/exact"
)

func grid(lo, hi float64, n int) []float64 {
	g := make([]float64, n)
	for i := range g {
		g[i] = lo + (hi-lo)*float64(i)/float64(n-1)
	}
	return g
}

// The float64 table transform of the exact ring ρ agrees with the
// closed-form transfer matrix (Baxter ch. 2) wherever the sign is above
// 1e−9, to an absolute 1e−12 in the sign: rounding is far below any
// statistical error, as the package comment argues.
func TestTableMatchesClosedForm(t *testing.T) {
	for _, n := range []int{15, 64, 256} {
		beta := 0.45
		th := grid(0, 1.2, 241)
		v := NewTable(n, th).Eval(exact.RingLnRho(n, beta))
		for i, x := range th {
			s, m := exact.RingSign(n, beta, x)
			if math.Abs(s) < 1e-9 {
				continue
			}
			if math.Abs(v.Sign[i]-s) > 1e-12 {
				t.Errorf("N=%d θ=%v: sign %v, exact %v", n, x, v.Sign[i], s)
			}
			if math.Abs(v.ImM[i]-m) > 1e-9*math.Max(1, math.Abs(m))/math.Abs(s) {
				t.Errorf("N=%d θ=%v: Im m %v, exact %v", n, x, v.ImM[i], m)
			}
		}
	}
}

// With noiseless replicas (identical to the exact ρ) the first zero is the
// exact one (closed form in package exact).
func TestFirstZeroOfExactDensity(t *testing.T) {
	n, beta := 20, 0.5
	lr := exact.RingLnRho(n, beta)
	th := grid(0, 0.8, 161)
	// replicas: tiny, independent perturbations of the middle sectors
	var reps [][]float64
	for j := 0; j < 50; j++ {
		r := append([]float64(nil), lr...)
		for k := range r {
			r[k] += 1e-6 * math.Sin(float64(7*j+3*k))
		}
		reps = append(reps, r)
	}
	tab := NewTable(n, th)
	c := Evaluate(tab, lr, reps)
	z := FirstZero(c, tab, lr, reps, 0.95)
	want := exact.RingFirstZero(n, beta)
	if !z.Resolved || math.Abs(z.Value-want) > 1e-9 {
		t.Fatalf("first zero %+v, exact %v", z, want)
	}
	if !(z.Lo < want && want < z.Hi) {
		t.Errorf("bracket (%v, %v) misses %v", z.Lo, z.Hi, want)
	}
	// with noise 1e−6 the sign never sinks below 2σ on this grid
	reach, lb := Reach(c, 2, z.Lo, z.Hi)
	if !lb || reach != th[len(th)-1] {
		t.Errorf("reach %v (lower bound %v), want the grid end as a lower bound", reach, lb)
	}
}

// BenchmarkTransform: R·N·G = 200·4096·1001 (replicas × sites × grid
// points), the size named in the speed goal.
func BenchmarkTransform(b *testing.B) {
	n, beta := 4096, 0.4
	lr := exact.RingLnRho(n, beta)
	reps := make([][]float64, 200)
	for j := range reps {
		reps[j] = lr
	}
	th := grid(0, 0.5, 1001)
	tab := NewTable(n, th)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		Evaluate(tab, lr, reps)
	}
}

// The dual sum from exact D (ring link transfer matrix) equals the
// magnetization Fourier sum from the exact ring ρ, sign and Im m, to 1e−10
// where |sign| > 1e−6: both are Z(β, iθ)/Z(β, 0) (e^{iθs} =
// cos θ (1 + i s tan θ)); Im m checked against the ring's closed form
// (transfer matrix: R. J. Baxter, Exactly Solved Models, ch. 2).
func TestDualTableMatchesFourierSum(t *testing.T) {
	for _, c := range []struct {
		n    int
		beta float64
	}{{12, 0.5}, {33, 0.3}, {64, 0.8}} {
		lnD, err := exact.RingMonomerLnD(c.n, c.beta)
		if err != nil {
			t.Fatal(err)
		}
		grid := []float64{0, 0.01, 0.05, 0.1, 0.2, 0.35, 0.5, 0.8, 1.2, math.Pi / 2}
		dual := NewDualTable(c.n, grid)
		v := dual.EvalMany([][]float64{lnD})[0]
		checked := 0
		for g, th := range grid {
			sign, imM := exact.RingSign(c.n, c.beta, th)
			if math.Abs(sign) < 1e-6 {
				continue
			}
			checked++
			abs := 0.0
			for j, l := range lnD {
				abs += math.Exp(l + mulLn(c.n-2*j, math.Log(math.Cos(th))) + mulLn(2*j, math.Log(math.Sin(th))))
			}
			tol := 100 * 0x1p-53 * abs
			if math.Abs(v.Sign[g]-sign) > tol+1e-13*math.Abs(sign) {
				t.Errorf("N=%d θ=%v: dual sign %.15g, ring %.15g", c.n, th, v.Sign[g], sign)
			}
			if math.Abs(v.ImM[g]-imM) > (tol/math.Abs(sign)+1e-12)*float64(c.n)*math.Max(1, math.Abs(imM)) {
				t.Errorf("N=%d θ=%v: dual Im m %.15g, ring %.15g", c.n, th, v.ImM[g], imM)
			}
			if s := dual.SignAt(lnD, th); math.Abs(s-v.Sign[g]) > 1e-13 {
				t.Errorf("N=%d θ=%v: SignAt %.15g, table %.15g", c.n, th, s, v.Sign[g])
			}
		}
		if checked < 4 {
			t.Errorf("N=%d: only %d points checked", c.n, checked)
		}
	}
}
