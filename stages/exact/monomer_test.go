package exact

import (
	"math"
	"testing"
)

// Check value (../shared/PHYSICS.md, verified there by enumeration): on the
// 3×3 torus at β = 0.3, D(2)/D(0) = 15.8344238770326.
func TestMonomerCheckValue(t *testing.T) {
	c, err := Enumerate(lat(t, 2, 3))
	if err != nil {
		t.Fatal(err)
	}
	lnD, err := MonomerLnD(c.Rho(0.3), c.N, 1e-14, 1<<12)
	if err != nil {
		t.Fatal(err)
	}
	if got := math.Exp(lnD[1]); math.Abs(got-15.8344238770326) > 1e-12 {
		t.Errorf("D(2)/D(0) = %.15g, want 15.8344238770326", got)
	}
}

// The dual form of the sign from exact D equals the magnetization Fourier
// sum from exact ρ (high precision) to 1e−12 relative where |sign| > 1e−6:
// rings (domain counts), 2D 4×4 and 8×8 (integer transfer matrix), 3D 3³
// (enumeration); the identity follows from e^{iθs} = cos θ(1 + is tan θ).
func TestMonomerSignIdentity(t *testing.T) {
	type tc struct {
		name string
		n    int
		rho  RhoFunc
	}
	var cases []tc
	for _, nn := range []int{8, 20} {
		cases = append(cases, tc{"ring", nn, RingRho(nn, 0.4)})
	}
	c4, _ := TorusCounts(4)
	cases = append(cases, tc{"4x4", 16, c4.Rho(0.3)})
	c3, _ := Enumerate(lat(t, 3, 3))
	cases = append(cases, tc{"3x3x3", 27, c3.Rho(0.2)})
	if !testing.Short() {
		c8, _ := TorusCounts(8)
		cases = append(cases, tc{"8x8", 64, c8.Rho(0.3)})
	}
	for _, c := range cases {
		ratios, _, err := MonomerD(c.rho, c.n, 1e-14, 1<<13)
		if err != nil {
			t.Fatal(err)
		}
		checked := 0
		for _, th := range []float64{0.02, 0.05, 0.1, 0.2, 0.3} {
			want, _ := HighPrecision(c.rho, c.n, th, 1e-13, 1<<13)
			if math.Abs(want) < 1e-6 {
				continue
			}
			checked++
			if got := MonomerSign(c.n, ratios, th); math.Abs(got-want) > 1e-12*math.Abs(want)+1e-15 {
				t.Errorf("%s θ=%v: dual sign %.15g, magnetization sign %.15g", c.name, th, got, want)
			}
		}
		if checked == 0 {
			t.Errorf("%s: no θ with |sign| > 1e−6", c.name)
		}
	}
}

// The ring's link transfer matrix against the Krawtchouk transform of the
// exact ring ρ (domain counts in math/big), two independent routes to D(n):
// R. B. Griffiths, C. A. Hurst, S. Sherman, J. Math. Phys. 11, 790 (1970)
// (from memory) for the expansion both rest on.
func TestRingMonomerTransferMatrix(t *testing.T) {
	for _, c := range []struct {
		n    int
		beta float64
	}{{8, 0.3}, {9, 0.7}, {20, 0.4}, {64, 1.0}} {
		want, err := MonomerLnD(RingRho(c.n, c.beta), c.n, 1e-14, 1<<13)
		if err != nil {
			t.Fatal(err)
		}
		got, err := RingMonomerLnD(c.n, c.beta)
		if err != nil {
			t.Fatal(err)
		}
		if len(got) != len(want) {
			t.Fatalf("N=%d: %d values, want %d", c.n, len(got), len(want))
		}
		for m := range want {
			if math.Abs(got[m]-want[m]) > 1e-12*math.Max(1, math.Abs(want[m])) {
				t.Errorf("N=%d β=%v n=%d: ln D = %.15g, Krawtchouk %.15g", c.n, c.beta, 2*m, got[m], want[m])
			}
		}
	}
	if _, err := RingMonomerLnD(2, 0.3); err == nil {
		t.Error("a ring of 2 sites was accepted")
	}
}
