package stages

import (
	"fmt"
	"math"
	"runtime"
	"strata/stages/analysis"
	"strconv"

	"strata/stages/dos"
	"strata/stages/exact"
	"strata/stages/lattice"
	"strata/stages/ratio"
	"strata/stages/transform"
)

// Shard names one sample shard of a branch.
type Shard struct{ M, Chunk int }

// RatiosParams configure the ratios of one branch.
type RatiosParams struct {
	D, L                      int
	Beta                      float64
	Estimator                 string
	Sectors                   string // "" or Magnetization, or Monomer
	Block                     int    // sweeps per stored row of magnetization shards
	MinTauRatio, WarnTauRatio float64
	Shards                    []Shard // in the order of the inputs
}

// RatiosOut is the ratios stage's output. For monomer sectors the ratio
// labels are n = 2, 4, …, ≤ N and each ratio is ln[D(n)/D(n−2)].
type RatiosOut struct {
	D, N      int
	Beta      float64
	Estimator string
	Sectors   string `json:",omitempty"` // Monomer, or empty for magnetization
	Result    ratio.Result
}

// Ratios returns the task estimating ln r(M) from a branch's shards. It
// decodes the shards of one sector at a time (the estimators visit the
// sectors in turn), so its memory grows with one sector's measurement
// series, not with the branch's.
func Ratios(p RatiosParams) Task {
	monomer := p.Sectors == Monomer
	params := []Param{
		{"beta", F(p.Beta)}, {"dimension", I(p.D)}, {"estimator", p.Estimator},
		{"min_tau_ratio", F(p.MinTauRatio)}, {"size", I(p.L)}, {"warn_tau_ratio", F(p.WarnTauRatio)},
	}
	sectors := ""
	if monomer {
		params = append(params, Param{"sectors", Monomer})
		sectors = Monomer
	} else {
		params = append(params, Param{"block_sweeps", I(p.Block)})
	}
	return lazyTask(Task{
		Stage: RatiosStage, Version: ratiosVersion,
		Params: params,
		Lazy: func(get func(int) ([]byte, error)) ([]byte, error) {
			lat, err := lattice.New(p.D, p.L)
			if err != nil {
				return nil, err
			}
			bySector := map[int][]int{}
			for i, sh := range p.Shards {
				bySector[sh.M] = append(bySector[sh.M], i)
			}
			in := &ratio.Input{D: p.D, N: lat.N, Beta: p.Beta, Cols: Columns(p.Estimator, p.D), Monomer: monomer,
				MinTauRatio: p.MinTauRatio, WarnTauRatio: p.WarnTauRatio}
			if !monomer {
				in.SweepsPerRow = p.Block
			}
			in.Load = func(m int) ([][]float64, error) {
				var out [][]float64
				for _, i := range bySector[m] {
					b, err := get(i)
					if err != nil {
						return nil, err
					}
					sh := p.Shards[i]
					var data []float64
					if monomer {
						var cols int
						if data, _, cols, err = DecodeNpy(b); err == nil && cols != in.Cols {
							err = fmt.Errorf("%d columns, want %d", cols, in.Cols)
						}
					} else {
						var raw []uint32
						var cols int
						want := ratio.RawColumns(ratio.ChainOf(p.Estimator), p.D)
						if raw, _, cols, err = DecodeCounts(b); err == nil && cols != want {
							err = fmt.Errorf("%d columns, want %d", cols, want)
						}
						if err == nil {
							data, err = ratio.Cook(p.Estimator, p.D, lat.N, sh.M, p.Beta, raw)
						}
					}
					if err != nil {
						return nil, fmt.Errorf("shard %s chunk %d: %w", sectorLabel(sectors, sh.M), sh.Chunk, err)
					}
					out = append(out, data)
				}
				return out, nil
			}
			res, err := ratio.Estimate(p.Estimator, in)
			if err != nil {
				return nil, err
			}
			return encode(RatiosOut{D: p.D, N: lat.N, Beta: p.Beta, Estimator: p.Estimator, Sectors: sectors, Result: *res})
		},
	})
}

// StitchOut is the stitched density of states with its replicas. For
// magnetization sectors LnRho is ln ρ(M) at index (M+N)/2; for monomer
// sectors (Sectors = Monomer) it is ln D(n) − ln D(0) at index n/2 and the
// pair labels M are n = 2, 4, ….
type StitchOut struct {
	D, N                int
	Beta                float64
	Sectors             string    `json:",omitempty"`
	M                   []int     // pair labels M of the ratios, N, N−2, … (monomer: n = 2, 4, …)
	LnRatio, LnRatioErr []float64 // ln ρ(M)/ρ(M−2) (monomer: ln D(n)/D(n−2))
	Tau                 []float64
	LnRho, LnRhoErr     []float64   // index (M+N)/2 (monomer: n/2)
	Replicas            [][]float64 // ln ρ (monomer: ln D) per replica
	Warnings            []string
}

// sectorLabel names a chain: "M=4" or "n=4".
func sectorLabel(sectors string, m int) string {
	if sectors == Monomer {
		return fmt.Sprintf("n=%d", m)
	}
	return fmt.Sprintf("M=%d", m)
}

// Stitch returns the task that stitches the ratios into ln ρ(M) and draws
// R error replicas (seeded by seed) through it.
func Stitch(replicas int, seed uint64) Task {
	return Task{
		Stage: StitchStage, Version: stitchVersion,
		Params: []Param{{"replicas", I(replicas)}, {"seed", fmt.Sprint(seed)}},
		Run: func(inputs [][]byte) ([]byte, error) {
			var r RatiosOut
			if err := decode(inputs[0], &r); err != nil {
				return nil, err
			}
			out := StitchOut{D: r.D, N: r.N, Beta: r.Beta, Sectors: r.Sectors, Warnings: r.Result.Warnings}
			stitch := func(lnr []float64) []float64 { return dos.Stitch(r.D, r.N, r.Beta, lnr) }
			if r.Sectors == Monomer {
				stitch = dos.StitchMonomer
			}
			var lnr []float64
			for _, q := range r.Result.Ratios {
				out.M = append(out.M, q.M)
				out.LnRatio = append(out.LnRatio, q.LnR)
				out.LnRatioErr = append(out.LnRatioErr, q.Err)
				out.Tau = append(out.Tau, q.Tau)
				lnr = append(lnr, q.LnR)
			}
			out.LnRho = stitch(lnr)
			for _, rep := range dos.Replicas(&r.Result, replicas, seed) {
				out.Replicas = append(out.Replicas, stitch(rep))
			}
			out.LnRhoErr = make([]float64, len(out.LnRho))
			col := make([]float64, len(out.Replicas))
			for k := range out.LnRhoErr {
				for j, rep := range out.Replicas {
					col[j] = rep[k]
				}
				out.LnRhoErr[k] = analysis.StdDev(col)
			}
			return encode(out)
		},
	}
}

// ExactOut is an exact reference for one branch.
type ExactOut struct {
	Kind      string // "ring" (closed forms), "counts" (exact g(S, M)) or "density" (floating-point ρ_β)
	D, N      int
	Beta      float64
	LnRho     []float64
	LnRhoErr  []float64 // bound on the absolute error of LnRho
	FirstZero NullableFloat
	// FirstZeroErr bounds the error of FirstZero from the inputs' error
	// and the float64 evaluation of the sign near the root.
	FirstZeroErr NullableFloat
	// RelErr bounds the relative error of each ρ(M) fed to the Fourier
	// sum: 0 for the closed forms and the exact counts.
	RelErr  float64
	Counts  *exact.Counts  `json:",omitempty"`
	Density *exact.Density `json:",omitempty"`
}

// MaxRingTable bounds the ring's exact ρ(M) table (its domain sum costs
// O(N²)); larger rings keep the closed-form sign, Im m and zeros, which
// cost O(1) per θ, and have no ln_rho_exact column.
const MaxRingTable = 4096

// Exact reference kinds.
const (
	ExactRing    = "ring"
	ExactCounts  = "counts"
	ExactDensity = "density"
)

// DefaultExactMaxSites is the default of [exact] max_sites: the whole range
// of the transfer matrices (2D 12×12, 3D 4³).
func DefaultExactMaxSites(d int) int {
	switch d {
	case 2:
		return exact.MaxDensitySize2D * exact.MaxDensitySize2D
	case 3:
		return exact.MaxDensitySize3D * exact.MaxDensitySize3D * exact.MaxDensitySize3D
	}
	return 0
}

// ExactKind says how the exact reference of L^d at β is computed: closed
// forms on rings (any size), integer counts g(S, M) where they fit (2D
// L ≤ 8 by transfer matrix, 3D up to 27 sites by enumeration), else the
// floating-point transfer matrix at fixed β (2D L ≤ 12, 3D L = 4, β up to
// exact.DensityMaxBeta). d ≥ 2 lattices with more than maxSites sites get
// none. When there is none, why says so.
func ExactKind(d, l int, beta float64, maxSites int) (kind, why string) {
	if d == 1 {
		return ExactRing, ""
	}
	n := 1
	for i := 0; i < d; i++ {
		n *= l
	}
	switch {
	case n > maxSites:
		return "", fmt.Sprintf("%d^%d = %d sites exceeds exact.max_sites = %d", l, d, n, maxSites)
	case d == 2 && l <= exact.MaxTorusSize, d == 3 && n <= exact.MaxEnumerateSites:
		return ExactCounts, ""
	case !exact.DensityAvailable(d, l):
		return "", fmt.Sprintf("no exact reference for %d^%d sites (d = 1 any size; d = 2 up to L = %d; d = 3 up to L = %d)",
			l, d, exact.MaxDensitySize2D, exact.MaxDensitySize3D)
	case beta > exact.DensityMaxBeta(d, l):
		return "", fmt.Sprintf("β = %v is above %.3g, where the floating-point transfer matrix of %d^%d could underflow",
			beta, exact.DensityMaxBeta(d, l), l, d)
	}
	return ExactDensity, ""
}

// ExactCountsTask returns the task computing g(S, M) for L^d (d ≥ 2).
func ExactCountsTask(d, l int) Task {
	return Task{
		Stage: ExactStage, Version: exactVersion,
		Params: []Param{{"counts", "g(S,M)"}, {"dimension", I(d)}, {"size", I(l)}},
		Run: func([][]byte) ([]byte, error) {
			var c *exact.Counts
			var err error
			if d == 2 {
				c, err = exact.TorusCounts(l)
			} else {
				var lat *lattice.Lattice
				if lat, err = lattice.New(d, l); err == nil {
					c, err = exact.Enumerate(lat)
				}
			}
			if err != nil {
				return nil, err
			}
			return encode(c)
		},
	}
}

// ExactDensityTask returns the task computing ρ_β(M) of L^d at one β by the
// floating-point transfer matrix, on all CPUs (the output does not depend
// on their number).
func ExactDensityTask(d, l int, beta float64) Task {
	return Task{
		Stage: ExactDensityStage, Version: exactDensityVersion,
		Params: []Param{{"beta", F(beta)}, {"dimension", I(d)}, {"size", I(l)}},
		Run: func([][]byte) ([]byte, error) {
			dens, err := exact.TorusDensity(d, l, beta, runtime.GOMAXPROCS(0))
			if err != nil {
				return nil, err
			}
			return encode(dens)
		},
	}
}

// Exact returns the task computing the exact reference of one branch; for
// the counts and density kinds inputs[0] is the output of ExactCountsTask
// or ExactDensityTask.
func Exact(d, l int, beta float64, kind string) Task {
	return Task{
		Stage: ExactStage, Version: exactVersion,
		Params: []Param{{"beta", F(beta)}, {"dimension", I(d)}, {"kind", kind}, {"size", I(l)}},
		Run: func(inputs [][]byte) ([]byte, error) {
			lat, err := lattice.New(d, l)
			if err != nil {
				return nil, err
			}
			out := ExactOut{Kind: kind, D: d, N: lat.N, Beta: beta}
			switch kind {
			case ExactRing:
				if lat.N <= MaxRingTable {
					out.LnRho = exact.RingLnRho(lat.N, beta)
					out.LnRhoErr = exact.RingLnRhoErr(lat.N, beta)
				}
				z := exact.RingFirstZero(lat.N, beta)
				out.FirstZero = NullableFloat(z)
				out.FirstZeroErr = NullableFloat(8 * epsilon / math.Sin(z)) // acos of a few-ulp argument
				return encode(out)
			case ExactCounts, ExactDensity:
			default:
				return nil, fmt.Errorf("unknown exact reference kind %q", kind)
			}
			if len(inputs) != 1 {
				return nil, fmt.Errorf("exact reference of kind %s needs one input", kind)
			}
			if kind == ExactCounts {
				var c exact.Counts
				if err := decode(inputs[0], &c); err != nil {
					return nil, err
				}
				out.Counts = &c
				out.LnRho = c.LnRho(beta)
				out.LnRhoErr = c.LnRhoErr(beta)
			} else {
				var dens exact.Density
				if err := decode(inputs[0], &dens); err != nil {
					return nil, err
				}
				out.Density = &dens
				out.RelErr = dens.RelErr
				out.LnRho = dens.LnRho()
				out.LnRhoErr = dens.LnRhoErr()
			}
			z, zerr := firstZeroScan(lat.N, out.LnRho, out.LnRhoErr)
			out.FirstZero, out.FirstZeroErr = NullableFloat(z), NullableFloat(zerr)
			return encode(out)
		},
	}
}

const epsilon = 0x1p-53

// firstZeroScan finds the first sign change of Z(iθ) on (0, π/2] from an
// exact ln ρ and refines it by bisection in float64; NaN if there is none.
// The error bound is δ/|sign′(θ₁)|, δ the bound on the float64 sign near
// the root: the inputs' error (ln ρ to within lnRhoErr, a relative error
// of ρ) plus the rounding of the sum, (N+4)ε relative to Z(0) (Higham,
// Accuracy and Stability of Numerical Algorithms, §4.2), plus the rounding
// of ln ρ − max before the exponential.
func firstZeroScan(n int, lnRho, lnRhoErr []float64) (zero, err float64) {
	const steps = 4000
	theta := make([]float64, steps+1)
	sign := make([]float64, steps+1)
	for i := range theta {
		theta[i] = math.Pi / 2 * float64(i) / steps
		sign[i] = transform.SignAt(n, lnRho, theta[i])
	}
	zero = transform.FirstRoot(n, lnRho, theta, sign)
	if math.IsNaN(zero) {
		return zero, math.NaN()
	}
	delta := float64(n+4) * epsilon
	top := math.Inf(-1)
	for _, v := range lnRho {
		top = math.Max(top, math.Abs(v))
	}
	in := 0.0
	for _, e := range lnRhoErr {
		in = math.Max(in, e)
	}
	delta += in + 4*epsilon*top
	return zero, delta / math.Abs(transform.SignSlope(n, lnRho, zero))
}

// TransformParams are the θ grid and the zero and reach rules.
type TransformParams struct {
	ThetaMin, ThetaMax float64
	Points             int
	ReachFactor        float64
	ZeroFraction       float64
	MaxBits            int
	// HasExact and HasFit say which optional inputs follow the stitch
	// output: the exact reference, then the fit.
	HasExact, HasFit bool
	// Sectors: Monomer transforms ln D(n) by the dual sum; the exact
	// reference is the same physics (sign and zeros do not depend on the
	// representation).
	Sectors string
}

// Grid returns the θ grid θ_i = (θ_min·(n−1−i) + θ_max·i)/(n−1), each
// rounded to 12 significant digits: the value computed with is the value
// printed (0.05, not 0.049999999999999996), and θ_0, θ_{n−1} are exactly
// the study's θ_min and θ_max.
func (p TransformParams) Grid() []float64 {
	g := make([]float64, p.Points)
	n1 := float64(p.Points - 1)
	for i := range g {
		x := (p.ThetaMin*(n1-float64(i)) + p.ThetaMax*float64(i)) / n1
		g[i], _ = strconv.ParseFloat(strconv.FormatFloat(x, 'g', 12, 64), 64)
	}
	return g
}

// ValErr is a value with its error.
type ValErr struct {
	Value float64 `json:"value"`
	Error float64 `json:"error"`
}

// TransformOut is one branch's transform.
type TransformOut struct {
	N                   int
	Theta               []float64
	Sign, SignErr       []NullableFloat
	ImM, ImMErr         []NullableFloat
	DeltaF, DeltaFErr   []NullableFloat
	SignExact, ImMExact []NullableFloat `json:",omitempty"`
	FirstZero           *ValErr
	ZeroRoots           []float64 // replica roots of a resolved first zero
	ZeroBracket         [2]NullableFloat
	SingleCrossing      float64
	Reach               NullableFloat
	ReachLowerBound     bool
	// ReachBelowZero is the reach capped below the first zero (resolved
	// or exact, whichever is smaller): the reach on the grid can pass a
	// zero where |sign| ≥ factor·σ on both sides, which depends on where
	// the grid points fall, not on the physics.
	ReachBelowZero NullableFloat
	// ZeroLobeDepth is the deepest significance −sign/σ of the negative
	// lobe after a resolved first zero; ZeroMarginal is true when it is
	// below MarginalDepth (see there).
	ZeroLobeDepth  NullableFloat
	ZeroMarginal   bool
	ExactFirstZero NullableFloat
	HasExact       bool
	Fits           []FitCurve `json:",omitempty"`
}

// Transform returns the task computing sign(θ), Im m(θ), Δf(θ) with
// replica errors, the first zero and the reach. inputs[0] is the stitch
// output; then the exact reference if p.HasExact, then the fit if p.HasFit.
func Transform(p TransformParams) Task {
	params := []Param{
		{"max_bits", I(p.MaxBits)}, {"reach_factor", F(p.ReachFactor)},
		{"theta_max", F(p.ThetaMax)}, {"theta_min", F(p.ThetaMin)}, {"theta_points", I(p.Points)},
		{"zero_fraction", F(p.ZeroFraction)}, {"with_exact", fmt.Sprint(p.HasExact)}, {"with_fit", fmt.Sprint(p.HasFit)},
	}
	if p.Sectors == Monomer {
		params = append(params, Param{"sectors", Monomer})
	}
	return Task{
		Stage: TransformStage, Version: transformVersion,
		Params: params,
		Run: func(inputs [][]byte) ([]byte, error) {
			var s StitchOut
			if err := decode(inputs[0], &s); err != nil {
				return nil, err
			}
			if s.Sectors != p.Sectors && !(s.Sectors == "" && p.Sectors == Magnetization) {
				return nil, fmt.Errorf("transform of %q sectors got a stitched density of %q sectors", p.Sectors, s.Sectors)
			}
			if s.Sectors == Monomer && p.HasFit {
				return nil, fmt.Errorf("fits of the monomer density are not supported")
			}
			grid := p.Grid()
			tab := SumFor(s.Sectors, s.N, grid)
			c := transform.Evaluate(tab, s.LnRho, s.Replicas)
			out := TransformOut{N: s.N, Theta: grid, Sign: nullable(c.Sign), SignErr: nullable(c.SignErr),
				ImM: nullable(c.ImM), ImMErr: nullable(c.ImMErr),
				DeltaF: nullable(c.DeltaF), DeltaFErr: nullable(c.DeltaFErr), ExactFirstZero: NullableFloat(math.NaN())}
			z := transform.FirstZero(c, tab, s.LnRho, s.Replicas, p.ZeroFraction)
			lo, hi := math.NaN(), math.NaN()
			out.SingleCrossing = z.SingleCrossing
			out.ZeroBracket = [2]NullableFloat{NullableFloat(math.NaN()), NullableFloat(math.NaN())}
			if z.Resolved {
				out.FirstZero = &ValErr{z.Value, z.Err}
				out.ZeroRoots = z.ReplicaRoots
				lo, hi = z.Lo, z.Hi
				out.ZeroBracket = [2]NullableFloat{NullableFloat(lo), NullableFloat(hi)}
			}
			out.ZeroLobeDepth = NullableFloat(math.NaN())
			if z.Resolved {
				d := lobeDepth(c, z.Value)
				out.ZeroLobeDepth, out.ZeroMarginal = NullableFloat(d), !(d >= MarginalDepth)
			}
			reach, lb := transform.Reach(c, p.ReachFactor, lo, hi)
			out.Reach, out.ReachLowerBound = NullableFloat(reach), lb
			next := 1
			if p.HasExact {
				var e ExactOut
				if err := decode(inputs[next], &e); err != nil {
					return nil, err
				}
				next++
				out.HasExact = true
				out.ExactFirstZero = e.FirstZero
				out.SignExact, out.ImMExact = ExactOnGrid(&e, grid, p.MaxBits)
			}
			out.ReachBelowZero = NullableFloat(reachBelowZero(grid, reach, out.FirstZero, float64(out.ExactFirstZero)))
			if p.HasFit {
				var f FitOut
				if err := decode(inputs[next], &f); err != nil {
					return nil, err
				}
				out.Fits = fitCurves(&f, tab.(*transform.Table), c, s.N)
			}
			return encode(out)
		},
	}
}

// MarginalDepth: a resolved zero is marginal when the deepest point of the
// sign's negative lobe after it lies less than 2σ beyond the bracket's
// −2σ threshold (depth < 4σ). Then a 2σ fluctuation of the sign could have
// left it unresolved: its resolution depends on a fluctuation, and at such
// statistics the resolved zeros are the runs whose sign fluctuated low,
// which resolve early (measured on a 32-ring at β = 0.8 with 50 000
// sweeps: every pull negative). The flag cannot unbias what it keeps —
// any threshold on the data selects on the fluctuation — it tells which
// zeros not to trust: they are kept out of the scaling fit.
const MarginalDepth = 4

// lobeDepth returns max(−sign/σ) over the grid points after zero while the
// sign stays non-positive (the negative lobe).
func lobeDepth(c *transform.Curve, zero float64) float64 {
	depth, in := 0.0, false
	for i, th := range c.Theta {
		if th <= zero {
			continue
		}
		if c.Sign[i] > 0 {
			if in {
				break
			}
			continue
		}
		in = true
		if c.SignErr[i] > 0 {
			depth = math.Max(depth, -c.Sign[i]/c.SignErr[i])
		}
	}
	return depth
}

// reachBelowZero caps a reach at the first zero: the reach itself when it
// lies below the zero, else the largest grid point below the zero.
func reachBelowZero(grid []float64, reach float64, zero *ValErr, exactZero float64) float64 {
	limit := math.Inf(1)
	if zero != nil {
		limit = zero.Value
	}
	if !math.IsNaN(exactZero) {
		limit = math.Min(limit, exactZero)
	}
	if math.IsNaN(reach) || reach < limit {
		return reach
	}
	out := math.NaN()
	for _, th := range grid {
		if th < limit && th <= reach {
			out = th
		}
	}
	return out
}

// SupportedDigits is the relative precision below which an exact value on
// the grid is replaced by NaN: a value is kept where the error its inputs
// carry is at most 1e−3 of it.
const SupportedDigits = 1e-3

// ExactOnGrid evaluates the exact sign and Im m on a grid: closed forms on the
// ring, the high-precision Fourier sum (NaN where unverified) otherwise.
// With inputs of relative error δ (e.RelErr) the sign is off by at most δ
// (Σ ρ|cos θM| ≤ Z(0)) and Im m by about δ(1+|Im m|)/|sign|, so points
// with |sign| < δ/SupportedDigits are NaN.
func ExactOnGrid(e *ExactOut, grid []float64, maxBits int) (sign, imM []NullableFloat) {
	sign = make([]NullableFloat, len(grid))
	imM = make([]NullableFloat, len(grid))
	var rho exact.RhoFunc
	switch e.Kind {
	case ExactCounts:
		rho = e.Counts.Rho(e.Beta)
	case ExactDensity:
		rho = e.Density.Rho()
	}
	for i, th := range grid {
		var s, m float64
		if e.Kind == ExactRing {
			s, m = exact.RingSign(e.N, e.Beta, th)
		} else {
			s, m = exact.HighPrecision(rho, e.N, th, 1e-12, uint(maxBits))
		}
		if math.Abs(s)*SupportedDigits < e.RelErr {
			s, m = math.NaN(), math.NaN()
		}
		sign[i], imM[i] = NullableFloat(s), NullableFloat(m)
	}
	return sign, imM
}
