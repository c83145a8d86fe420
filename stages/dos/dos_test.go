package dos

import (
	"math"
	"testing"

	"strata/stages/exact"
	"strata/stages/ratio"
)

// Stitching the exact ratios of the ring (domain count, PHYSICS.md) gives
// back the exact ln ρ, for even and odd N.
func TestStitchExactRing(t *testing.T) {
	for _, n := range []int{7, 8, 13, 32} {
		beta := 0.4
		want := exact.RingLnRho(n, beta)
		var lnr []float64
		for m := n; m > 0; m -= 2 {
			lnr = append(lnr, want[(m+n)/2]-want[(m-2+n)/2])
		}
		got := Stitch(1, n, beta, lnr)
		for k := range want {
			if math.Abs(got[k]-want[k]) > 1e-12*math.Max(1, math.Abs(want[k])) {
				t.Errorf("N=%d M=%d: %v, want %v", n, 2*k-n, got[k], want[k])
			}
		}
	}
}

// Replicas: ratios that share a chain are correlated as the linear model
// says, and exact ratios (no terms) are identical in every replica.
func TestReplicasCovariance(t *testing.T) {
	res := &ratio.Result{
		Blocks: []ratio.Block{{Cov: [][]float64{{0.04, 0.03}, {0.03, 0.09}}, Tau: []float64{1, 1}}},
		Ratios: []ratio.Ratio{
			{M: 6, LnR: 1},
			{M: 4, LnR: 2, Terms: []ratio.Term{{Block: 0, Var: 0, Coef: 1}}},
			{M: 2, LnR: 3, Terms: []ratio.Term{{Block: 0, Var: 1, Coef: -1}}},
		},
	}
	reps := Replicas(res, 20000, 1)
	var m1, m2, c12, v1, v2 float64
	for _, r := range reps {
		if r[0] != 1 {
			t.Fatal("an exact ratio varies between replicas")
		}
		m1 += r[1]
		m2 += r[2]
	}
	n := float64(len(reps))
	m1, m2 = m1/n, m2/n
	for _, r := range reps {
		v1 += (r[1] - m1) * (r[1] - m1)
		v2 += (r[2] - m2) * (r[2] - m2)
		c12 += (r[1] - m1) * (r[2] - m2)
	}
	v1, v2, c12 = v1/n, v2/n, c12/n
	// expected: var 0.04 and 0.09, covariance −0.03 (the second term has coefficient −1);
	// tolerances about 4 standard errors of the sample moments for 20000 draws
	if math.Abs(v1-0.04) > 0.002 || math.Abs(v2-0.09) > 0.004 || math.Abs(c12+0.03) > 0.002 {
		t.Errorf("var %v %v cov %v, want 0.04 0.09 −0.03", v1, v2, c12)
	}
}
