package exact

import (
	"fmt"
	"math"
	"math/big"
	"math/bits"
	"sort"
	"sync"
)

// Limits of the floating-point transfer matrix (TorusDensity): the front
// holds L^{d−1} spins, so its 2^{L^{d−1}} states × (N+1) magnetizations
// bound memory and time. 2D 12×12: 4096 × 145 per worker; 3D 4³:
// 65536 × 65.
const (
	MaxDensitySize2D = 12
	MaxDensitySize3D = 4
)

// Density is ρ_β(M) at one β from the floating-point transfer matrix:
//
//	ρ_β(M) = Frac[k] · 2^{Exp[k]} · e^{β·Bonds},  k = (M+N)/2,
//
// with Frac in [0.5, 1) (or 0 where ρ vanishes, which it never does on
// these lattices). Every ρ(M) has relative error at most RelErr: all terms
// are positive, so the rounding error of each entry is bounded by γ_K =
// Kε/(1−Kε), ε = 2^−53, K the longest chain of roundings along any path
// (4 per transferred site: the weight e^{β(·)} to 1 ulp, its product and
// one addition; plus the pairwise sums over front states and symmetry
// classes). Scaling is by exact powers of two, so it adds no error.
type Density struct {
	D, L, N, Bonds int
	Beta           float64
	Frac           []float64
	Exp            []int
	RelErr         float64
}

// LnRho returns ln ρ_β(M), indexed by k = (M+N)/2.
func (d *Density) LnRho() []float64 {
	out := make([]float64, len(d.Frac))
	for k, f := range d.Frac {
		out[k] = math.Log(f) + float64(d.Exp[k])*math.Ln2 + d.Beta*float64(d.Bonds)
	}
	return out
}

// LnRhoErr returns a bound on the absolute error of LnRho: the relative
// error of ρ plus the rounding of the logarithm and of the sum of its
// three parts (a few ulps of their magnitudes).
func (d *Density) LnRhoErr() []float64 {
	out := make([]float64, len(d.Frac))
	for k, f := range d.Frac {
		mag := math.Abs(math.Log(f)) + math.Abs(float64(d.Exp[k])*math.Ln2) + math.Abs(d.Beta*float64(d.Bonds))
		out[k] = d.RelErr + 4*epsilon*(mag+1)
	}
	return out
}

// Rho returns ρ(M) in high precision: Frac·2^Exp is converted exactly and
// e^{β·Bonds} is computed at the requested precision, so the only input
// error left is RelErr.
func (d *Density) Rho() RhoFunc {
	return func(prec uint) []*big.Float {
		shift := BigExp(newF(prec).Mul(newF(prec).SetFloat64(d.Beta), newF(prec).SetInt64(int64(d.Bonds))), prec)
		out := make([]*big.Float, len(d.Frac))
		for k, f := range d.Frac {
			v := newF(prec).SetMantExp(newF(prec).SetFloat64(f), d.Exp[k])
			out[k] = v.Mul(v, shift)
		}
		return out
	}
}

const epsilon = 0x1p-53

// gamma returns γ_K = Kε/(1−Kε), the standard bound on K chained
// roundings (N. J. Higham, Accuracy and Stability of Numerical Algorithms,
// 2nd ed. (2002), Lemma 3.1).
func gamma(k int) float64 { return float64(k) * epsilon / (1 - float64(k)*epsilon) }

// DensityAvailable reports whether TorusDensity covers L^d.
func DensityAvailable(d, l int) bool {
	switch d {
	case 1:
		return l >= 2 && l <= 1<<12
	case 2:
		return l >= 2 && l <= MaxDensitySize2D
	case 3:
		return l >= 2 && l <= MaxDensitySize3D
	}
	return false
}

// DensityMaxBeta is the largest β at which TorusDensity guarantees that no
// contribution is lost to underflow. Within one magnetization column every
// value is scaled to at most 1; a value dropped below the smallest normal
// number 2^−1022 can only matter later if the remaining lattice favours its
// front over the column's largest one, by at most e^{2β·B} with B the
// bonds between the front and the unplaced sites (≤ d·L^{d−1}). Requiring
// 2^N · 2^−1022 · e^{2βB} ≤ 2^−60 (2^N bounds the number of paths) gives
// β ≤ ((962 − N)·ln 2)/(2B). At 12×12: β ≤ 11.8; at 4³: β ≤ 6.5.
func DensityMaxBeta(d, l int) float64 {
	n, p := 1, 1
	for i := 0; i < d; i++ {
		n *= l
	}
	for i := 0; i < d-1; i++ {
		p *= l
	}
	return float64(962-n) * math.Ln2 / float64(2*d*p)
}

// TorusDensity returns ρ_β(M) of the periodic L^d lattice (d ≤ 3) by a
// site-by-site transfer matrix in float64 along the last axis. The front
// is the most recent L^{d−1} spins; each front state carries a vector over
// the number of up spins, scaled per column by a power of two (so no
// overflow at any β and no underflow up to DensityMaxBeta). The first
// slice r0 is held fixed so that the last slice can close the periodic
// boundary; first slices related by a symmetry of the slice torus
// (translations, axis reflections and permutations) give the same ρ, and
// a global spin flip mirrors it in M, so one representative per class of
// the combined group is propagated and weighted by its class size. Classes
// run on up to workers goroutines; their results are combined in class
// order, so the output does not depend on workers.
func TorusDensity(d, l int, beta float64, workers int) (*Density, error) {
	if !DensityAvailable(d, l) {
		return nil, fmt.Errorf("exact: no floating-point transfer matrix for %d^%d (2D up to L = %d, 3D up to L = %d)",
			l, d, MaxDensitySize2D, MaxDensitySize3D)
	}
	if !(beta >= 0) || beta > DensityMaxBeta(d, l) {
		return nil, fmt.Errorf("exact: β = %v outside the range [0, %.3g] where the floating-point transfer matrix of %d^%d is guaranteed free of underflow",
			beta, DensityMaxBeta(d, l), l, d)
	}
	t := newTorusTM(d, l, beta)
	classes := t.classes()
	if workers < 1 {
		workers = 1
	}
	results := make([]classResult, len(classes))
	var wg sync.WaitGroup
	next := make(chan int)
	for w := 0; w < workers && w < len(classes); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			buf := make([]float64, t.states*t.width)
			for i := range next {
				results[i] = t.propagate(classes[i].r0, buf)
			}
		}()
	}
	for i := range classes {
		next <- i
	}
	close(next)
	wg.Wait()

	// ρ(M) = Σ_classes mult·(ρ_r0(M) + [flip distinct] ρ_r0(−M)), summed
	// pairwise per M at the largest exponent of its terms.
	n := t.n
	out := &Density{D: d, L: l, N: n, Bonds: d * n, Beta: beta, Frac: make([]float64, n+1), Exp: make([]int, n+1)}
	terms := make([]float64, 0, 2*len(classes))
	exps := make([]int, 0, 2*len(classes))
	for k := 0; k <= n; k++ {
		terms, exps = terms[:0], exps[:0]
		for i, c := range classes {
			for j, src := range [2]int{k, n - k} {
				if j == 1 && !c.flipDistinct {
					continue
				}
				f, e := math.Frexp(results[i].frac[src] * float64(c.mult))
				if f == 0 {
					continue
				}
				terms = append(terms, f)
				exps = append(exps, e+results[i].exp[src])
			}
		}
		top := math.MinInt
		for _, e := range exps {
			top = max(top, e)
		}
		for j := range terms {
			terms[j] = math.Ldexp(terms[j], exps[j]-top)
		}
		f, e := math.Frexp(pairwiseSum(terms))
		out.Frac[k], out.Exp[k] = f, e+top
	}
	steps := n - t.p
	out.RelErr = gamma(4*steps + 2 + bits.Len(uint(t.states)) + 1 + bits.Len(uint(2*len(classes))))
	return out, nil
}

// pairwiseSum sums positive terms with error ≤ ⌈log₂ n⌉ ε relative.
func pairwiseSum(x []float64) float64 {
	switch len(x) {
	case 0:
		return 0
	case 1:
		return x[0]
	}
	h := len(x) / 2
	return pairwiseSum(x[:h]) + pairwiseSum(x[h:])
}

// torusTM holds the geometry of the site-by-site transfer matrix.
type torusTM struct {
	d, l, n, p int // p = L^{d−1} front sites
	states     int // 2^p
	width      int // n+1 up-spin counts
	beta       float64
	inSlice    [][]int   // per front position: earlier in-slice neighbours (with multiplicity)
	perms      [][]int   // symmetries of the slice torus
	weights    []float64 // weights[j] = e^{−βj}, j = 0..4d
}

func newTorusTM(d, l int, beta float64) *torusTM {
	p := 1
	for i := 0; i < d-1; i++ {
		p *= l
	}
	t := &torusTM{d: d, l: l, n: p * l, p: p, states: 1 << uint(p), width: p*l + 1, beta: beta}
	// in-slice neighbours of position q with a smaller index: both
	// directions of each of the d−1 slice axes (for L = 2 the two name the
	// same site, which carries two bonds).
	t.inSlice = make([][]int, p)
	stride := 1
	for k := 0; k < d-1; k++ {
		for q := 0; q < p; q++ {
			x := (q / stride) % l
			for _, nx := range []int{(x + 1) % l, (x + l - 1) % l} {
				j := q + (nx-x)*stride
				if j < q {
					t.inSlice[q] = append(t.inSlice[q], j)
				}
			}
		}
		stride *= l
	}
	t.perms = slicePerms(d-1, l)
	t.weights = make([]float64, 4*d+1)
	for j := range t.weights {
		t.weights[j] = math.Exp(-beta * float64(j))
	}
	return t
}

// slicePerms returns the permutations of the L^dim slice torus generated
// by translations, reflections of each axis and (for dim = 2) the axis
// swap; position q = x_0 + L x_1.
func slicePerms(dim, l int) [][]int {
	p := 1
	for i := 0; i < dim; i++ {
		p *= l
	}
	if dim == 0 {
		return [][]int{{0}}
	}
	var out [][]int
	swaps := []bool{false}
	if dim == 2 {
		swaps = append(swaps, true)
	}
	seen := map[string]bool{}
	for _, swap := range swaps {
		for refl := 0; refl < 1<<uint(dim); refl++ {
			for tr := 0; tr < p; tr++ {
				perm := make([]int, p)
				for q := 0; q < p; q++ {
					c := []int{q % l, 0}
					if dim == 2 {
						c[1] = q / l
					}
					if swap {
						c[0], c[1] = c[1], c[0]
					}
					tc := []int{tr % l, tr / l}
					nq, stride := 0, 1
					for a := 0; a < dim; a++ {
						v := c[a]
						if refl>>uint(a)&1 == 1 {
							v = (l - v) % l
						}
						v = (v + tc[a]) % l
						nq += v * stride
						stride *= l
					}
					perm[q] = nq
				}
				key := fmt.Sprint(perm)
				if !seen[key] {
					seen[key] = true
					out = append(out, perm)
				}
			}
		}
	}
	return out
}

type class struct {
	r0           int
	mult         int  // size of r0's orbit under the slice symmetries
	flipDistinct bool // the flipped orbit is a different class of the same size
}

// classes returns one representative (the smallest member) per class of
// first slices under the slice symmetries and the global spin flip.
func (t *torusTM) classes() []class {
	// byte-wise lookup tables apply a permutation to a bit pattern
	nb := (t.p + 7) / 8
	tables := make([][][256]int, len(t.perms))
	for g, perm := range t.perms {
		tables[g] = make([][256]int, nb)
		for b := 0; b < nb; b++ {
			for v := 0; v < 256; v++ {
				out := 0
				for i := 0; i < 8 && 8*b+i < t.p; i++ {
					if v>>uint(i)&1 == 1 {
						out |= 1 << uint(perm[8*b+i])
					}
				}
				tables[g][b][v] = out
			}
		}
	}
	apply := func(g, x int) int {
		out := 0
		for b := 0; b < nb; b++ {
			out |= tables[g][b][(x>>uint(8*b))&255]
		}
		return out
	}
	mask := t.states - 1
	var out []class
	images := make([]int, 0, len(t.perms))
	for r0 := 0; r0 < t.states; r0++ {
		rep := true
		images = images[:0]
		for g := range t.perms {
			a, b := apply(g, r0), apply(g, r0^mask)
			if a < r0 || b < r0 {
				rep = false
				break
			}
			images = append(images, a)
		}
		if !rep {
			continue
		}
		sort.Ints(images)
		mult, flipped := 0, false
		for i, v := range images {
			if i == 0 || v != images[i-1] {
				mult++
			}
			if v == r0^mask {
				flipped = true
			}
		}
		out = append(out, class{r0: r0, mult: mult, flipDistinct: !flipped})
	}
	return out
}

type classResult struct {
	frac []float64 // ρ_r0(M)·e^{−β·Bonds} = frac·2^exp, index (M+N)/2
	exp  []int
}

// propagate runs the transfer matrix from the fixed first slice r0; buf
// holds states×width values (front state major, up-spin count minor).
func (t *torusTM) propagate(r0 int, buf []float64) classResult {
	w := t.width
	for i := range buf {
		buf[i] = 0
	}
	spin := func(st, q int) int { return 2*(st>>uint(q)&1) - 1 }
	// first slice: its in-slice bonds, normalized weight e^{β(S₀ − B₀)}
	s0, b0 := 0, 0
	for q := 0; q < t.p; q++ {
		for _, j := range t.inSlice[q] {
			s0 += spin(r0, q) * spin(r0, j)
			b0++
		}
	}
	up0 := bits.OnesCount(uint(r0))
	buf[r0*w+up0] = math.Exp(t.beta * float64(s0-b0)) // ≤ 1
	exp := make([]int, w)                             // column scales: value = stored·2^exp[m]
	colMax := make([]float64, w)
	colMax[up0] = buf[r0*w+up0]
	newMax := make([]float64, w)
	f0 := make([]float64, w) // factors for contributions that keep the up count
	f1 := make([]float64, w) // factors for contributions that add an up spin (indexed by the new count)
	newExp := make([]int, w)
	var wt [2][2]float64 // [new spin][old spin] for the current h_other
	lo, hi := up0, up0   // active up counts
	for z := 1; z < t.l; z++ {
		last := z == t.l-1
		for q := 0; q < t.p; q++ {
			// new scales: each new column m takes the larger of its two
			// sources' magnitudes, so every scaled contribution is < 1.
			for m := lo; m <= hi+1; m++ {
				e := math.MinInt
				if m <= hi && colMax[m] > 0 {
					_, x := math.Frexp(colMax[m])
					e = exp[m] + x
				}
				if m-1 >= lo && colMax[m-1] > 0 {
					_, x := math.Frexp(colMax[m-1])
					e = max(e, exp[m-1]+x)
				}
				if e == math.MinInt {
					e = 0
				}
				newExp[m] = e
				if m <= hi {
					f0[m] = math.Ldexp(1, exp[m]-e)
				}
				if m-1 >= lo {
					f1[m] = math.Ldexp(1, exp[m-1]-e)
				}
				newMax[m] = 0
			}
			k := 1 + len(t.inSlice[q]) // bonds closed here: −z, earlier in-slice
			if last {
				k++ // +z wraps to the first slice
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
					h += spin(r0, q)
				}
				for ns := 0; ns < 2; ns++ {
					for os := 0; os < 2; os++ {
						s, o := 2*ns-1, 2*os-1
						wt[ns][os] = t.weights[k-s*(o+h)]
					}
				}
				A := buf[a*w : (a+1)*w]
				B := buf[b*w : (b+1)*w]
				w00, w01, w10, w11 := wt[0][0], wt[0][1], wt[1][0], wt[1][1]
				// downward, so B[m+1] is read before it is overwritten
				for m := hi; m >= lo; m-- {
					x, y := A[m], B[m]
					na := (w00*x + w01*y) * f0[m]
					nb := (w10*x + w11*y) * f1[m+1]
					A[m] = na
					B[m+1] = nb
					if na > newMax[m] {
						newMax[m] = na
					}
					if nb > newMax[m+1] {
						newMax[m+1] = nb
					}
				}
				B[lo] = 0
			}
			hi++
			copy(exp[lo:hi+1], newExp[lo:hi+1])
			copy(colMax[lo:hi+1], newMax[lo:hi+1])
		}
	}
	// ρ_r0 per column: pairwise sum over front states
	col := make([]float64, t.states)
	res := classResult{frac: make([]float64, w), exp: make([]int, w)}
	for m := lo; m <= hi; m++ {
		for st := 0; st < t.states; st++ {
			col[st] = buf[st*w+m]
		}
		f, e := math.Frexp(pairwiseSum(col))
		res.frac[m], res.exp[m] = f, e+exp[m]
	}
	return res
}
