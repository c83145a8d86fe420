package stages

import (
	"math"
	"testing"

	"strata/stages/exact"
)

// On exact data every cumulant route reproduces the exact zero where its
// sequence has converged (12-ring β = 0.5: h = 0 to 1e−3 at order 20), Re h₀
// is 0 at h = 0, and the phase routes carry no zero but a bias onset.
func TestRoutesOnExactDensity(t *testing.T) {
	const n, beta = 12, 0.5
	lr := exact.RingLnRho(n, beta)
	s := &StitchOut{D: 1, N: n, Beta: beta, LnRho: lr, Replicas: [][]float64{lr, lr, lr}}
	grid := make([]float64, 81)
	sign := make([]NullableFloat, len(grid))
	zero := make([]NullableFloat, len(grid))
	for i := range grid {
		grid[i] = 0.01 * float64(i)
		v, _ := exact.RingSign(n, beta, grid[i])
		sign[i] = NullableFloat(v)
	}
	tr := &TransformOut{N: n, Theta: grid, Sign: sign, SignErr: zero, SignExact: sign, HasExact: true,
		FirstZero: &ValErr{exact.RingFirstZero(n, beta), 0}}
	ex := &ExactOut{Kind: ExactRing, N: n, Beta: beta, LnRho: lr}
	out := evalRoutes(RoutesParams{MaxOrder: 20, Fields: []float64{0, 0.1}, HasExact: true}, s, tr, ex)
	byName := map[string]RouteResult{}
	for _, r := range out.Routes {
		byName[r.Route] = r
	}
	z := exact.RingFirstZero(n, beta)
	h0 := byName["cumulants_h0"]
	if h0.FirstZero == nil || math.Abs(float64(h0.FirstZero.Value)-z) > 1e-3 || h0.Order != 20 || float64(h0.ReH) != 0 {
		t.Errorf("cumulants_h0: %+v (exact zero %v)", h0, z)
	}
	if tr := float64(h0.Truncation); !(tr > 0 && float64(h0.FirstZero.Value)-z < 10*tr) {
		t.Errorf("cumulants_h0: truncation estimate %v against a bias of %v", tr, float64(h0.FirstZero.Value)-z)
	}
	if h1 := byName["cumulants_h0.1"]; h1.FirstZero == nil || math.Abs(float64(h1.FirstZero.Value)-z) > 0.01 {
		t.Errorf("cumulants_h0.1: %+v", h1)
	}
	for _, name := range PhaseRoutes {
		r := byName[name]
		if r.FirstZero != nil || math.IsNaN(float64(r.BiasOnsetExact)) || r.Note == "" {
			t.Errorf("%s: %+v", name, r)
		}
	}
	if len(out.Cumulants) != 2*20 {
		t.Errorf("%d cumulant rows, want 40", len(out.Cumulants))
	}
}
