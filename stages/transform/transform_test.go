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
	c := Evaluate(NewTable(n, th), lr, reps)
	z := FirstZero(c, n, lr, reps, 0.95)
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
