package stages

import (
	"fmt"
	"math"
	"strata/stages/analysis"

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
	MinTauRatio, WarnTauRatio float64
	Shards                    []Shard // in the order of the inputs
}

// RatiosOut is the ratios stage's output.
type RatiosOut struct {
	D, N      int
	Beta      float64
	Estimator string
	Result    ratio.Result
}

// Ratios returns the task estimating ln r(M) from a branch's shards.
func Ratios(p RatiosParams) Task {
	return Task{
		Stage: RatiosStage, Version: ratiosVersion,
		Params: []Param{
			{"beta", F(p.Beta)}, {"dimension", I(p.D)}, {"estimator", p.Estimator},
			{"min_tau_ratio", F(p.MinTauRatio)}, {"size", I(p.L)}, {"warn_tau_ratio", F(p.WarnTauRatio)},
		},
		Run: func(inputs [][]byte) ([]byte, error) {
			lat, err := lattice.New(p.D, p.L)
			if err != nil {
				return nil, err
			}
			in := &ratio.Input{D: p.D, N: lat.N, Beta: p.Beta, Cols: Columns(p.Estimator, p.D),
				Series: map[int][][]float64{}, MinTauRatio: p.MinTauRatio, WarnTauRatio: p.WarnTauRatio}
			for i, b := range inputs {
				data, _, cols, err := DecodeNpy(b)
				if err != nil {
					return nil, err
				}
				if cols != in.Cols {
					return nil, fmt.Errorf("shard M=%d chunk %d has %d columns, want %d", p.Shards[i].M, p.Shards[i].Chunk, cols, in.Cols)
				}
				m := p.Shards[i].M
				in.Series[m] = append(in.Series[m], data)
			}
			res, err := ratio.Estimate(p.Estimator, in)
			if err != nil {
				return nil, err
			}
			return encode(RatiosOut{D: p.D, N: lat.N, Beta: p.Beta, Estimator: p.Estimator, Result: *res})
		},
	}
}

// StitchOut is the stitched density of states with its replicas.
type StitchOut struct {
	D, N                int
	Beta                float64
	M                   []int     // pair labels M of the ratios, N, N−2, …
	LnRatio, LnRatioErr []float64 // ln ρ(M)/ρ(M−2)
	Tau                 []float64
	LnRho, LnRhoErr     []float64   // index (M+N)/2
	Replicas            [][]float64 // ln ρ per replica
	Warnings            []string
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
			out := StitchOut{D: r.D, N: r.N, Beta: r.Beta, Warnings: r.Result.Warnings}
			var lnr []float64
			for _, q := range r.Result.Ratios {
				out.M = append(out.M, q.M)
				out.LnRatio = append(out.LnRatio, q.LnR)
				out.LnRatioErr = append(out.LnRatioErr, q.Err)
				out.Tau = append(out.Tau, q.Tau)
				lnr = append(lnr, q.LnR)
			}
			out.LnRho = dos.Stitch(r.D, r.N, r.Beta, lnr)
			for _, rep := range dos.Replicas(&r.Result, replicas, seed) {
				out.Replicas = append(out.Replicas, dos.Stitch(r.D, r.N, r.Beta, rep))
			}
			out.LnRhoErr = make([]float64, r.N+1)
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
	Kind      string // "ring" (closed forms) or "counts" (exact g(S, M))
	D, N      int
	Beta      float64
	LnRho     []float64
	FirstZero NullableFloat
	Counts    *exact.Counts `json:",omitempty"`
}

// ExactAvailable reports whether an exact reference exists for L^d: the
// ring closed forms for d = 1, the torus transfer matrix for d = 2 up to
// L = 8, enumeration for d = 3 up to 27 sites.
func ExactAvailable(d, l int) bool {
	switch d {
	case 1:
		return true
	case 2:
		return l <= exact.MaxTorusSize
	}
	return math.Pow(float64(l), float64(d)) <= exact.MaxEnumerateSites
}

// NeedsCounts reports whether the exact reference of L^d is built from
// integer counts g(S, M) (which do not depend on β and are cached apart).
func NeedsCounts(d, l int) bool { return d > 1 && ExactAvailable(d, l) }

// ExactCounts returns the task computing g(S, M) for L^d (d ≥ 2).
func ExactCounts(d, l int) Task {
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

// Exact returns the task computing the exact reference of one branch; for
// d ≥ 2 inputs[0] is the output of ExactCounts(d, l).
func Exact(d, l int, beta float64) Task {
	return Task{
		Stage: ExactStage, Version: exactVersion,
		Params: []Param{{"beta", F(beta)}, {"dimension", I(d)}, {"size", I(l)}},
		Run: func(inputs [][]byte) ([]byte, error) {
			lat, err := lattice.New(d, l)
			if err != nil {
				return nil, err
			}
			out := ExactOut{D: d, N: lat.N, Beta: beta}
			if d == 1 {
				out.Kind = "ring"
				out.LnRho = exact.RingLnRho(lat.N, beta)
				out.FirstZero = NullableFloat(exact.RingFirstZero(lat.N, beta))
				return encode(out)
			}
			if len(inputs) != 1 {
				return nil, fmt.Errorf("exact reference for d=%d needs the counts as input", d)
			}
			var c exact.Counts
			if err := decode(inputs[0], &c); err != nil {
				return nil, err
			}
			out.Kind = "counts"
			out.Counts = &c
			out.LnRho = c.LnRho(beta)
			out.FirstZero = NullableFloat(firstZeroScan(lat.N, out.LnRho))
			return encode(out)
		},
	}
}

// firstZeroScan finds the first sign change of Z(iθ) on (0, π/2] from an
// exact ln ρ and refines it by bisection; NaN if there is none. float64 is
// adequate for the lattices with counts (N ≤ 64) where the sign near the
// first zero is far above 1e−13; the exact-zero test of package exact
// checks this against the high-precision sum.
func firstZeroScan(n int, lnRho []float64) float64 {
	const steps = 4000
	theta := make([]float64, steps+1)
	sign := make([]float64, steps+1)
	for i := range theta {
		theta[i] = math.Pi / 2 * float64(i) / steps
		sign[i] = transform.SignAt(n, lnRho, theta[i])
	}
	return transform.FirstRoot(n, lnRho, theta, sign)
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
}

// Grid returns the θ grid.
func (p TransformParams) Grid() []float64 {
	g := make([]float64, p.Points)
	for i := range g {
		g[i] = p.ThetaMin + (p.ThetaMax-p.ThetaMin)*float64(i)/float64(p.Points-1)
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
	ExactFirstZero      NullableFloat
	HasExact            bool
	Fits                []FitCurve `json:",omitempty"`
}

// Transform returns the task computing sign(θ), Im m(θ), Δf(θ) with
// replica errors, the first zero and the reach. inputs[0] is the stitch
// output; then the exact reference if p.HasExact, then the fit if p.HasFit.
func Transform(p TransformParams) Task {
	return Task{
		Stage: TransformStage, Version: transformVersion,
		Params: []Param{
			{"max_bits", I(p.MaxBits)}, {"reach_factor", F(p.ReachFactor)},
			{"theta_max", F(p.ThetaMax)}, {"theta_min", F(p.ThetaMin)}, {"theta_points", I(p.Points)},
			{"zero_fraction", F(p.ZeroFraction)}, {"with_exact", fmt.Sprint(p.HasExact)}, {"with_fit", fmt.Sprint(p.HasFit)},
		},
		Run: func(inputs [][]byte) ([]byte, error) {
			var s StitchOut
			if err := decode(inputs[0], &s); err != nil {
				return nil, err
			}
			grid := p.Grid()
			tab := transform.NewTable(s.N, grid)
			c := transform.Evaluate(tab, s.LnRho, s.Replicas)
			out := TransformOut{N: s.N, Theta: grid, Sign: nullable(c.Sign), SignErr: nullable(c.SignErr),
				ImM: nullable(c.ImM), ImMErr: nullable(c.ImMErr),
				DeltaF: nullable(c.DeltaF), DeltaFErr: nullable(c.DeltaFErr), ExactFirstZero: NullableFloat(math.NaN())}
			z := transform.FirstZero(c, s.N, s.LnRho, s.Replicas, p.ZeroFraction)
			lo, hi := math.NaN(), math.NaN()
			out.SingleCrossing = z.SingleCrossing
			out.ZeroBracket = [2]NullableFloat{NullableFloat(math.NaN()), NullableFloat(math.NaN())}
			if z.Resolved {
				out.FirstZero = &ValErr{z.Value, z.Err}
				out.ZeroRoots = z.ReplicaRoots
				lo, hi = z.Lo, z.Hi
				out.ZeroBracket = [2]NullableFloat{NullableFloat(lo), NullableFloat(hi)}
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
			if p.HasFit {
				var f FitOut
				if err := decode(inputs[next], &f); err != nil {
					return nil, err
				}
				out.Fits = fitCurves(&f, tab, c, s.N)
			}
			return encode(out)
		},
	}
}

// ExactOnGrid evaluates the exact sign and Im m on a grid: closed forms on the
// ring, the high-precision Fourier sum (NaN where unverified) otherwise.
func ExactOnGrid(e *ExactOut, grid []float64, maxBits int) (sign, imM []NullableFloat) {
	sign = make([]NullableFloat, len(grid))
	imM = make([]NullableFloat, len(grid))
	var rho exact.RhoFunc
	if e.Kind != "ring" {
		rho = e.Counts.Rho(e.Beta)
	}
	for i, th := range grid {
		var s, m float64
		if e.Kind == "ring" {
			s, m = exact.RingSign(e.N, e.Beta, th)
		} else {
			s, m = exact.HighPrecision(rho, e.N, th, 1e-12, uint(maxBits))
		}
		sign[i], imM[i] = NullableFloat(s), NullableFloat(m)
	}
	return sign, imM
}
