package stages

import (
	"encoding/json"
	"math"
	"testing"
)

func runExact(t *testing.T, d, l int, beta float64, kind string) ExactOut {
	t.Helper()
	var in []byte
	var err error
	switch kind {
	case ExactCounts:
		in, err = ExactCountsTask(d, l).Run(nil)
	case ExactDensity:
		in, err = ExactDensityTask(d, l, beta).Run(nil)
	}
	if err != nil {
		t.Fatal(err)
	}
	b, err := Exact(d, l, beta, kind).Run([][]byte{in})
	if err != nil {
		t.Fatal(err)
	}
	var out ExactOut
	if err := json.Unmarshal(b, &out); err != nil {
		t.Fatal(err)
	}
	return out
}

// Where both exist (2D L ≤ 8, 3D L ≤ 3), the floating-point transfer
// matrix and the exact integer counts (checked against enumeration and
// P. D. Beale, Phys. Rev. Lett. 76, 78 (1996)) give the same first zero
// within the sum of their stated error bounds, each ≤ 1e−10.
func TestExactDensityFirstZeroMatchesCounts(t *testing.T) {
	type tc struct{ d, l int }
	cases := []tc{{2, 4}, {2, 6}, {3, 3}}
	if !testing.Short() {
		cases = append(cases, tc{2, 8})
	}
	for _, c := range cases {
		for _, beta := range []float64{0.2, 0.35} {
			a := runExact(t, c.d, c.l, beta, ExactCounts)
			b := runExact(t, c.d, c.l, beta, ExactDensity)
			za, zb := float64(a.FirstZero), float64(b.FirstZero)
			ea, eb := float64(a.FirstZeroErr), float64(b.FirstZeroErr)
			if math.IsNaN(za) || math.IsNaN(zb) {
				t.Fatalf("d=%d L=%d β=%v: no first zero (%v, %v)", c.d, c.l, beta, za, zb)
			}
			if ea > 1e-10 || eb > 1e-10 {
				t.Errorf("d=%d L=%d β=%v: error bounds %v, %v above 1e−10", c.d, c.l, beta, ea, eb)
			}
			if math.Abs(za-zb) > ea+eb {
				t.Errorf("d=%d L=%d β=%v: first zero %.16g (counts) vs %.16g (transfer matrix), |Δ| = %.3g > %.3g",
					c.d, c.l, beta, za, zb, math.Abs(za-zb), ea+eb)
			}
			// the exact sign on a grid agrees to the inputs' precision
			grid := []float64{0.02, 0.1, 0.3}
			sa, _ := ExactOnGrid(&a, grid, 1<<12)
			sb, _ := ExactOnGrid(&b, grid, 1<<12)
			for i := range grid {
				if d := math.Abs(float64(sa[i] - sb[i])); d > b.RelErr+1e-13 {
					t.Errorf("d=%d L=%d β=%v θ=%v: sign %v vs %v", c.d, c.l, beta, grid[i], sa[i], sb[i])
				}
			}
		}
	}
}

// Grid points where |sign| is below what the inputs' precision supports
// are NaN, never a number made of rounding.
func TestExactOnGridRefusesUnsupported(t *testing.T) {
	e := runExact(t, 2, 4, 0.3, ExactDensity)
	e.RelErr = 1e-4 // pretend coarse inputs
	grid := []float64{0, 0.05, 0.4, 0.6}
	sign, imM := ExactOnGrid(&e, grid, 1<<12)
	for i, s := range sign {
		small := !math.IsNaN(float64(s)) && math.Abs(float64(s)) < e.RelErr/SupportedDigits
		if small {
			t.Errorf("θ=%v: sign %v kept although below %v", grid[i], s, e.RelErr/SupportedDigits)
		}
		if math.IsNaN(float64(s)) != math.IsNaN(float64(imM[i])) {
			t.Errorf("θ=%v: sign %v and Im m %v disagree on NaN", grid[i], s, imM[i])
		}
	}
	if float64(sign[0]) != 1 {
		t.Errorf("sign(0) = %v, want 1", sign[0])
	}
	nan := 0
	for _, s := range sign {
		if math.IsNaN(float64(s)) {
			nan++
		}
	}
	if nan == 0 {
		t.Error("no grid point refused although the inputs carry 1e−4")
	}
}

func TestExactKind(t *testing.T) {
	for _, c := range []struct {
		d, l     int
		beta     float64
		maxSites int
		want     string
	}{
		{1, 1000, 5, 0, ExactRing},
		{2, 8, 0.3, 144, ExactCounts},
		{2, 9, 0.3, 144, ExactDensity},
		{2, 12, 0.3, 144, ExactDensity},
		{2, 13, 0.3, 1000, ""},
		{2, 12, 0.3, 100, ""},
		{2, 12, 50, 144, ""},
		{3, 3, 0.3, 64, ExactCounts},
		{3, 4, 0.3, 64, ExactDensity},
		{3, 5, 0.3, 1000, ""},
	} {
		got, why := ExactKind(c.d, c.l, c.beta, c.maxSites)
		if got != c.want || (got == "") != (why != "") {
			t.Errorf("ExactKind(%d, %d, %v, %d) = %q, %q; want %q", c.d, c.l, c.beta, c.maxSites, got, why, c.want)
		}
	}
}
