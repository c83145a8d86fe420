// Package ratio turns measurement series of sector chains into the
// density-of-states ratios ln r(M) = ln ρ_β(M) − ln ρ_β(M−2), with errors
// and with the linear error model that the stitch stage needs for
// correlated replicas.
//
// Every chain contributes variables ℓ (logarithms of chain means, or for the
// indicator chain ln r itself) whose covariance comes from the Γ-method.
// Chains are independent, so the covariance is block diagonal. Each ratio is
// ln r(M) = LnR + Σ_k Coef_k δℓ_k to first order in the fluctuations δℓ.
package ratio

import (
	"fmt"
	"math"

	"strata/stages/analysis"
)

// Estimator names.
const (
	Insertion = "insertion"
	Bennett   = "bennett"
	Indicator = "indicator"
)

// Estimators lists the supported estimators.
var Estimators = []string{Insertion, Bennett, Indicator}

// Block is one independent chain's variables and their covariance.
type Block struct {
	Sector int         // sector M of the chain (indicator: the upper sector)
	Names  []string    // one per variable
	Values []float64   // central values
	Cov    [][]float64 // covariance of the variables
	Tau    []float64   // τ_int per variable, in sweeps (rows while estimating)
}

// Term is one coefficient of the linear error model.
type Term struct {
	Block, Var int
	Coef       float64
}

// Ratio is ln r(M) = ln[ρ(M)/ρ(M−2)].
type Ratio struct {
	M     int
	LnR   float64
	Err   float64
	Tau   float64 // largest τ_int of the variables it uses (sweeps)
	Terms []Term
}

// Result holds the ratios for M = N, N−2, …, > 0 in that order; for odd N
// the last one is M = 1 with ln r = 0 exactly (ρ(1) = ρ(−1)).
type Result struct {
	Blocks   []Block
	Ratios   []Ratio
	Warnings []string
}

// Input is the data of one branch: Series[M] holds the chunks (independent
// chains) of the chain labelled M, each chunk row-major with Cols columns.
type Input struct {
	D, N   int
	Beta   float64
	Cols   int
	Series map[int][][]float64
	// Load, when set, is used instead of Series: it returns the chunks of
	// chain M on demand, so that only one sector's series is in memory.
	Load func(m int) ([][]float64, error)
	// Monomer: the chains are monomer sectors n of the link
	// representation (labels n, pairs n = 2, 4, …, ≤ N), not
	// magnetization sectors M.
	Monomer bool
	// SweepsPerRow is the sweeps one measurement row stands for (the block
	// length of compact samples; 0 or 1: one sweep). τ_int is analysed in
	// rows and reported in sweeps.
	SweepsPerRow int
	// MinTauRatio refuses a variable with fewer than MinTauRatio·τ_int
	// measurements (Wolff's rule of thumb is about 100); WarnTauRatio warns.
	MinTauRatio, WarnTauRatio float64
}

// Sectors returns the chain labels an estimator needs for N sites: the
// fixed-sector chains M = N, N−2, …, ≥ 0 (insertion, Bennett), or the upper
// sectors of the pairs M = N, …, > 1 (indicator).
func Sectors(estimator string, n int) []int {
	var out []int
	low := 0
	if estimator == Indicator {
		low = 2
	}
	for m := n; m >= low; m -= 2 {
		out = append(out, m)
	}
	return out
}

// pairs returns M = N, N−2, … > 1.
func pairs(n int) []int {
	var out []int
	for m := n; m > 1; m -= 2 {
		out = append(out, m)
	}
	return out
}

// unit names a measurement row in messages.
func (in *Input) unit() string {
	if in.SweepsPerRow > 1 {
		return fmt.Sprintf("blocks of %d sweeps", in.SweepsPerRow)
	}
	return "sweeps"
}

// label names sector m in messages: "M=12" or "n=12".
func (in *Input) label(m int) string {
	if in.Monomer {
		return fmt.Sprintf("n=%d", m)
	}
	return fmt.Sprintf("M=%d", m)
}

// column extracts column c of row-major chunks.
func column(chunks [][]float64, cols, c int) [][]float64 {
	out := make([][]float64, len(chunks))
	for k, ch := range chunks {
		n := len(ch) / cols
		col := make([]float64, n)
		for t := 0; t < n; t++ {
			col[t] = ch[t*cols+c]
		}
		out[k] = col
	}
	return out
}

func scale(reps [][]float64, f float64) [][]float64 {
	out := make([][]float64, len(reps))
	for k, r := range reps {
		o := make([]float64, len(r))
		for i, x := range r {
			o[i] = f * x
		}
		out[k] = o
	}
	return out
}

func add(a, b [][]float64) [][]float64 {
	out := make([][]float64, len(a))
	for k := range a {
		o := make([]float64, len(a[k]))
		for i := range o {
			o[i] = a[k][i] + b[k][i]
		}
		out[k] = o
	}
	return out
}

// logBlock builds a block whose variables are ln ā_c of the given series
// (one per name), with their covariance from the Γ-method applied to the
// projected series a_c/ā_c (first-order propagation, U. Wolff 2004 sec. 3)
// and the covariance from var(x+y) − var(x) − var(y).
func (in *Input) logBlock(sector int, names []string, series [][][]float64) (Block, error) {
	b := Block{Sector: sector, Names: names}
	k := len(series)
	proj := make([][][]float64, k)
	b.Cov = make([][]float64, k)
	for i, s := range series {
		g := analysis.Gamma(s, analysis.DefaultS)
		if !(g.Mean > 0) {
			return b, fmt.Errorf("sector %s: %s has mean %v; the chain never sampled the move it measures", in.label(sector), names[i], g.Mean)
		}
		b.Values = append(b.Values, math.Log(g.Mean))
		proj[i] = scale(s, 1/g.Mean)
		b.Cov[i] = make([]float64, k)
	}
	for i := range series {
		g := analysis.Gamma(proj[i], analysis.DefaultS)
		if err := in.checkTau(sector, names[i], g); err != nil {
			return b, err
		}
		b.Cov[i][i] = g.Err * g.Err
		b.Tau = append(b.Tau, g.Tau)
	}
	for i := range series {
		for j := i + 1; j < k; j++ {
			if b.Cov[i][i] == 0 || b.Cov[j][j] == 0 {
				continue
			}
			g := analysis.Gamma(add(proj[i], proj[j]), analysis.DefaultS)
			c := (g.Err*g.Err - b.Cov[i][i] - b.Cov[j][j]) / 2
			lim := math.Sqrt(b.Cov[i][i] * b.Cov[j][j])
			c = math.Max(-lim, math.Min(lim, c))
			b.Cov[i][j], b.Cov[j][i] = c, c
		}
	}
	return b, nil
}

func (in *Input) checkTau(sector int, name string, g analysis.Result) error {
	if g.Err == 0 {
		return nil // zero variance: exact, exempt
	}
	if in.MinTauRatio > 0 && float64(g.N) < in.MinTauRatio*g.Tau {
		return fmt.Errorf("sector %s: %s has τ_int = %.3g %s but only %d of them (need ≥ %g τ_int); raise sample.sweeps",
			in.label(sector), name, g.Tau, in.unit(), g.N, in.MinTauRatio)
	}
	return nil
}

// warnTau warns about variables of block b (measured on the chunks ch)
// with fewer than WarnTauRatio·τ_int measurements.
func (in *Input) warnTau(r *Result, b Block, ch [][]float64) {
	n := 0
	for _, c := range ch {
		n += len(c) / in.Cols
	}
	for i, t := range b.Tau {
		if in.WarnTauRatio > 0 && b.Cov[i][i] > 0 && float64(n) < in.WarnTauRatio*t {
			r.Warnings = append(r.Warnings, fmt.Sprintf("sector %s: %s has a large τ_int = %.3g %s for %d of them", in.label(b.Sector), b.Names[i], t, in.unit(), n))
		}
	}
}

func (r *Result) finish() {
	for i := range r.Ratios {
		q := &r.Ratios[i]
		v := 0.0
		for _, a := range q.Terms {
			for _, c := range q.Terms {
				if a.Block == c.Block {
					v += a.Coef * c.Coef * r.Blocks[a.Block].Cov[a.Var][c.Var]
				}
			}
			if t := r.Blocks[a.Block].Tau[a.Var]; t > q.Tau {
				q.Tau = t
			}
		}
		q.Err = math.Sqrt(math.Max(v, 0))
	}
}

func (in *Input) appendOddMiddle(r *Result) {
	if in.N%2 == 1 {
		r.Ratios = append(r.Ratios, Ratio{M: 1, Tau: 0})
	}
}

func (in *Input) chunks(m int) ([][]float64, error) {
	if in.Load != nil {
		c, err := in.Load(m)
		if err == nil && len(c) == 0 {
			err = fmt.Errorf("sector %s: no samples", in.label(m))
		}
		return c, err
	}
	c, ok := in.Series[m]
	if !ok || len(c) == 0 {
		return nil, fmt.Errorf("sector %s: no samples", in.label(m))
	}
	return c, nil
}

// Estimate dispatches on the estimator name; τ_int in the result is in
// sweeps.
func Estimate(estimator string, in *Input) (*Result, error) {
	r, err := in.estimate(estimator)
	if err != nil || in.SweepsPerRow <= 1 {
		return r, err
	}
	f := float64(in.SweepsPerRow)
	for i := range r.Blocks {
		for j := range r.Blocks[i].Tau {
			r.Blocks[i].Tau[j] *= f
		}
	}
	for i := range r.Ratios {
		r.Ratios[i].Tau *= f
	}
	return r, nil
}

func (in *Input) estimate(estimator string) (*Result, error) {
	if in.Monomer {
		switch estimator {
		case Insertion:
			return in.MonomerInsertion()
		case Indicator:
			return in.MonomerIndicator()
		}
		return nil, fmt.Errorf("ratio: estimator %q has no monomer form (use %s or %s)", estimator, Insertion, Indicator)
	}
	switch estimator {
	case Insertion:
		return in.Insertion()
	case Bennett:
		return in.Bennett()
	case Indicator:
		return in.Indicator()
	}
	return nil, fmt.Errorf("ratio: unknown estimator %q", estimator)
}

func analysisGamma(reps [][]float64) analysis.Result {
	return analysis.Gamma(reps, analysis.DefaultS)
}
