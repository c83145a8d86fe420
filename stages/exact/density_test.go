package exact

import (
	"fmt"
	"math"
	"math/cmplx"
	"runtime"
	"sync"
	"testing"
)

// The floating-point transfer matrix against the exact integer counts
// (brute-force enumeration for 3D L ≤ 3 and small rings, the integer torus
// transfer matrix for 2D L ≤ 8, itself checked against enumeration and
// Beale's 4×4 table): |Δ ln ρ| within the stated bound, which must be
// ≤ 1e−10 there.
func TestDensityMatchesIntegerCounts(t *testing.T) {
	type tc struct{ d, l int }
	cases := []tc{{1, 5}, {1, 12}, {2, 2}, {2, 3}, {2, 4}, {2, 5}, {2, 6}, {3, 2}, {3, 3}}
	if !testing.Short() {
		cases = append(cases, tc{2, 7}, tc{2, 8})
	}
	for _, c := range cases {
		var counts *Counts
		var err error
		if c.d == 2 {
			counts, err = TorusCounts(c.l)
		} else {
			counts, err = Enumerate(lat(t, c.d, c.l))
		}
		if err != nil {
			t.Fatal(err)
		}
		for _, beta := range []float64{0, 0.2216544, 0.44068679350977151, 1.3, 4} {
			dens, err := TorusDensity(c.d, c.l, beta, 2)
			if err != nil {
				t.Fatal(err)
			}
			want := counts.LnRho(beta)
			got, bound := dens.LnRho(), dens.LnRhoErr()
			for k := range want {
				// the integer path's own float64 log-sum-exp rounding
				own := 8 * epsilon * (math.Abs(want[k]) + float64(counts.Bonds))
				if d := math.Abs(got[k] - want[k]); d > bound[k]+own {
					t.Errorf("d=%d L=%d β=%v M=%d: ln ρ = %.17g, counts %.17g (|Δ| = %.3g > bound %.3g)",
						c.d, c.l, beta, 2*k-counts.N, got[k], want[k], d, bound[k]+own)
				}
				if bound[k] > 1e-10 {
					t.Errorf("d=%d L=%d: bound %.3g above 1e−10", c.d, c.l, bound[k])
				}
			}
		}
	}
}

// The output does not depend on the number of workers (bit-identical).
func TestDensityWorkersIdentical(t *testing.T) {
	a, err := TorusDensity(2, 6, 0.35, 1)
	if err != nil {
		t.Fatal(err)
	}
	b, err := TorusDensity(2, 6, 0.35, 3)
	if err != nil {
		t.Fatal(err)
	}
	for k := range a.Frac {
		if a.Frac[k] != b.Frac[k] || a.Exp[k] != b.Exp[k] {
			t.Fatalf("k=%d: %v·2^%d with 1 worker, %v·2^%d with 3", k, a.Frac[k], a.Exp[k], b.Frac[k], b.Exp[k])
		}
	}
}

// The number of classes and their weights: Σ mult·(1 + flipDistinct) = 2^P
// (every first slice counted once), and the number of classes of binary
// rings of L beads under rotation, reversal and colour exchange against a
// brute-force orbit count over strings (independent of the lookup tables).
func TestDensityClasses(t *testing.T) {
	for _, l := range []int{3, 4, 5, 6, 8, 10, 12} {
		tm := newTorusTM(2, l, 0.1)
		cl := tm.classes()
		if w := braceletClasses(l); len(cl) != w {
			t.Errorf("L=%d: %d classes, brute force %d", l, len(cl), w)
		}
		total := 0
		for _, c := range cl {
			total += c.mult
			if c.flipDistinct {
				total += c.mult
			}
		}
		if total != 1<<uint(l) {
			t.Errorf("L=%d: classes cover %d first rows, want %d", l, total, 1<<uint(l))
		}
	}
	tm := newTorusTM(3, 4, 0.1)
	total := 0
	for _, c := range tm.classes() {
		total += c.mult
		if c.flipDistinct {
			total += c.mult
		}
	}
	if total != 1<<16 {
		t.Errorf("4×4 slice: classes cover %d first planes, want 65536", total)
	}
	if g := len(tm.perms); g != 128 {
		t.Errorf("4×4 slice torus: %d symmetries, want 16 translations × 8 = 128", g)
	}
}

// Top sectors in closed form (PHYSICS.md "Sector ratios", L ≥ 3):
// ρ(N−2)/ρ(N) = N e^{−4dβ}, ρ(N−4)/ρ(N−2) = [2d e^{−2β(2d−2)} + (N−1−2d) e^{−4dβ}]/2,
// and ρ(M) = ρ(−M) (spin-flip symmetry), at 2D L = 10 (12 outside -short)
// and 3D L = 4 (outside -short).
func TestDensityTopSectorsAndSymmetry(t *testing.T) {
	type tc struct{ d, l int }
	cases := []tc{{2, 10}}
	if !testing.Short() {
		cases = append(cases, tc{2, 12}, tc{3, 4})
	}
	for _, c := range cases {
		beta := 0.3
		dens := sharedDensity(t, c.d, c.l, beta)
		n, d := dens.N, float64(c.d)
		lr := dens.LnRho()
		tol := 4 * dens.RelErr
		r1 := math.Exp(lr[n-1] - lr[n])
		if w := float64(n) * math.Exp(-4*d*beta); math.Abs(r1/w-1) > tol+1e-14 {
			t.Errorf("d=%d L=%d: ρ(N−2)/ρ(N) = %.16g, closed form %.16g", c.d, c.l, r1, w)
		}
		r2 := math.Exp(lr[n-2] - lr[n-1])
		if w := (2*d*math.Exp(-2*beta*(2*d-2)) + (float64(n)-1-2*d)*math.Exp(-4*d*beta)) / 2; math.Abs(r2/w-1) > tol+1e-14 {
			t.Errorf("d=%d L=%d: ρ(N−4)/ρ(N−2) = %.16g, closed form %.16g", c.d, c.l, r2, w)
		}
		for k := range lr {
			if math.Abs(lr[k]-lr[n-k]) > 2*dens.LnRhoErr()[k] {
				t.Errorf("d=%d L=%d: ln ρ(%d) − ln ρ(%d) = %g", c.d, c.l, 2*k-n, n-2*k, lr[k]-lr[n-k])
			}
		}
	}
}

// Σ_M ρ_β(M) against Kaufman's exact finite torus (B. Kaufman, Phys. Rev.
// 76, 1232 (1949)) at L = 10 and 12, to 1e−12 relative in Z.
func TestDensityKaufman(t *testing.T) {
	sizes := []int{10}
	if !testing.Short() {
		sizes = append(sizes, 12)
	}
	for _, l := range sizes {
		for _, beta := range []float64{0.1, 0.3, 0.44068679350977151, 0.7} {
			dens, err := TorusDensity(2, l, beta, runtime.GOMAXPROCS(0))
			if err != nil {
				t.Fatal(err)
			}
			got, want := logSumExp(dens.LnRho()), KaufmanLnZ(l, l, beta)
			if math.Abs(got-want) > 1e-12 {
				t.Errorf("L=%d β=%v: ln Σρ = %.16g, Kaufman %.16g (Δ %.3g)", l, beta, got, want, got-want)
			}
		}
	}
}

// The M-dependence, independently: Z(β, iθ)/Z(β, 0) from ρ (high-precision
// Fourier sum) against a complex-weight transfer matrix with the field on
// every site (no magnetization index) at three θ, at 2D L = 10 and (outside
// -short) 3D L = 4.
func TestDensityAgainstComplexTransfer(t *testing.T) {
	type tc struct{ d, l int }
	cases := []tc{{2, 6}, {2, 10}}
	if !testing.Short() {
		cases = append(cases, tc{3, 4})
	}
	for _, c := range cases {
		beta := 0.3
		dens := sharedDensity(t, c.d, c.l, beta)
		thetas := []float64{0.05, 0.15, 0.4}
		signs := complexTransferSigns(c.d, c.l, beta, thetas)
		for i, th := range thetas {
			want := signs[i]
			got, _ := HighPrecision(dens.Rho(), dens.N, th, 1e-12, 1<<12)
			tol := 1e3*dens.RelErr + 1e-12
			if math.Abs(got-want) > tol {
				t.Errorf("d=%d L=%d θ=%v: sign from ρ %.15g, complex transfer matrix %.15g", c.d, c.l, th, got, want)
			}
		}
	}
}

// complexTransferSigns returns Z(β,iθ)/Z(β,0) at each θ by a site-by-site
// transfer matrix whose site weights are e^{iθs}: the same front geometry
// as TorusDensity (first slice fixed, one representative per class; the
// flip conjugates Z, so a flipped class adds the conjugate), but no
// magnetization index and complex arithmetic.
func complexTransferSigns(d, l int, beta float64, thetas []float64) []float64 {
	t := newTorusTM(d, l, beta)
	spin := func(st, q int) int { return 2*(st>>uint(q)&1) - 1 }
	nt := len(thetas) + 1 // the last column is θ = 0
	site := make([][2]complex128, nt)
	for i := range site {
		th := 0.0
		if i < len(thetas) {
			th = thetas[i]
		}
		site[i] = [2]complex128{cmplx.Exp(complex(0, -th)), cmplx.Exp(complex(0, th))}
	}
	z := make([]complex128, nt)
	buf := make([]complex128, t.states*nt)
	for _, c := range t.classes() {
		for i := range buf {
			buf[i] = 0
		}
		s0, b0, m0 := 0, 0, 0
		for q := 0; q < t.p; q++ {
			m0 += spin(c.r0, q)
			for _, j := range t.inSlice[q] {
				s0 += spin(c.r0, q) * spin(c.r0, j)
				b0++
			}
		}
		w0 := math.Exp(beta * float64(s0-b0))
		for i := 0; i < nt; i++ {
			buf[c.r0*nt+i] = complex(w0, 0) * cmplx.Pow(site[i][1], complex(float64(m0), 0))
		}
		for zz := 1; zz < l; zz++ {
			last := zz == l-1
			for q := 0; q < t.p; q++ {
				k := 1 + len(t.inSlice[q])
				if last {
					k++
				}
				bit := 1 << uint(q)
				for a := 0; a < t.states; a++ {
					if a&bit != 0 {
						continue
					}
					b := a | bit
					h := 0
					for _, j := range t.inSlice[q] {
						h += spin(a, j)
					}
					if last {
						h += spin(c.r0, q)
					}
					wm0, wm1 := complex(t.weights[k+(-1+h)], 0), complex(t.weights[k+(1+h)], 0) // s = −1, old −1/+1
					wp0, wp1 := complex(t.weights[k-(-1+h)], 0), complex(t.weights[k-(1+h)], 0) // s = +1
					for i := 0; i < nt; i++ {
						x, y := buf[a*nt+i], buf[b*nt+i]
						buf[a*nt+i] = (wm0*x + wm1*y) * site[i][0]
						buf[b*nt+i] = (wp0*x + wp1*y) * site[i][1]
					}
				}
			}
		}
		mult := complex(float64(c.mult), 0)
		for i := 0; i < nt; i++ {
			var zc complex128
			for st := 0; st < t.states; st++ {
				zc += buf[st*nt+i]
			}
			z[i] += mult * zc
			if c.flipDistinct {
				z[i] += mult * cmplx.Conj(zc)
			}
		}
	}
	z0 := real(z[nt-1])
	out := make([]float64, len(thetas))
	for i := range out {
		if math.Abs(imag(z[i])) > 1e-9*z0 {
			panic(fmt.Sprintf("complex transfer matrix: Im Z = %g", imag(z[i])))
		}
		out[i] = real(z[i]) / z0
	}
	return out
}

// sharedDensity computes each (d, L, β) once per test binary: the 4³
// density takes tens of seconds and serves several tests.
func sharedDensity(t *testing.T, d, l int, beta float64) *Density {
	t.Helper()
	key := fmt.Sprint(d, l, beta)
	densityMemo.Lock()
	defer densityMemo.Unlock()
	if v, ok := densityMemo.m[key]; ok {
		return v
	}
	v, err := TorusDensity(d, l, beta, runtime.GOMAXPROCS(0))
	if err != nil {
		t.Fatal(err)
	}
	densityMemo.m[key] = v
	return v
}

var densityMemo = struct {
	sync.Mutex
	m map[string]*Density
}{m: map[string]*Density{}}

func braceletClasses(n int) int {
	seen := map[string]bool{}
	classes := 0
	for x := 0; x < 1<<uint(n); x++ {
		s := fmt.Sprintf("%0*b", n, x)
		if seen[s] {
			continue
		}
		classes++
		rev := []byte(s)
		for i, j := 0, n-1; i < j; i, j = i+1, j-1 {
			rev[i], rev[j] = rev[j], rev[i]
		}
		for _, y := range []string{s, string(rev)} {
			comp := []byte(y)
			for i := range comp {
				comp[i] ^= 1 // '0' ↔ '1'
			}
			for _, z := range []string{y, string(comp)} {
				for r := 0; r < n; r++ {
					seen[z[r:]+z[:r]] = true
				}
			}
		}
	}
	return classes
}

func BenchmarkTorusDensity(b *testing.B) {
	for _, c := range []struct{ d, l int }{{2, 8}, {2, 10}, {2, 12}, {3, 4}} {
		b.Run(fmt.Sprintf("d%d_L%d", c.d, c.l), func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				if _, err := TorusDensity(c.d, c.l, 0.3, runtime.GOMAXPROCS(0)); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}
