package pipeline

import (
	"encoding/json"
	"fmt"
	"math"

	"strata/stages"
)

const exactUsage = `Usage: strata exact --dimension D --size L --beta B [--theta-min X] [--theta-max X] [--theta-points N]

Prints exact references for the periodic L^d lattice as CSV on stdout
(theta,sign_exact,im_m_exact; sign = Z(β,iθ)/Z(β,0), im_m = Im<M>/N), after
comment lines (#) with the first zero and, in d = 1, the Lee–Yang edge.
Available: d = 1 any L (closed forms); d = 2 with L ≤ 8 (transfer matrix);
d = 3 with L^3 ≤ 27 (enumeration).

Flags:
`

func (e *env) exactCommand(args []string) int {
	fs := e.newFlagSet("exact", exactUsage)
	d := fs.Int("dimension", 1, "lattice dimension d (1, 2, 3)")
	l := fs.Int("size", 0, "linear size L")
	beta := fs.Float64("beta", math.NaN(), "inverse temperature β (J = 1)")
	tmin := fs.Float64("theta-min", 0, "smallest θ = Im h")
	tmax := fs.Float64("theta-max", 0.5, "largest θ")
	pts := fs.Int("theta-points", 101, "number of grid points")
	bits := fs.Int("max-bits", 1<<14, "precision cap of the high-precision sum (bits)")
	pos, code, done := e.parse(fs, args)
	if done {
		return code
	}
	var probs []string
	if len(pos) > 0 {
		probs = append(probs, fmt.Sprintf("unexpected arguments %v", pos))
	}
	if *d < 1 || *d > 3 {
		probs = append(probs, "--dimension must be 1, 2 or 3")
	}
	if *l < 2 {
		probs = append(probs, "--size must be ≥ 2")
	}
	if !(*beta >= 0) || math.IsInf(*beta, 0) {
		probs = append(probs, "--beta must be given, finite and ≥ 0")
	}
	if !(*tmin >= 0 && *tmax <= math.Pi/2 && *tmax > *tmin) || *pts < 2 {
		probs = append(probs, "need 0 ≤ theta-min < theta-max ≤ π/2 and theta-points ≥ 2")
	}
	if len(probs) == 0 && !stages.ExactAvailable(*d, *l) {
		probs = append(probs, fmt.Sprintf("no exact reference for %d^%d sites (d = 1 any size; d = 2 up to L = 8; d = 3 up to 27 sites)", *l, *d))
	}
	if len(probs) > 0 {
		for _, p := range probs {
			fmt.Fprintf(e.stderr, "strata exact: %s\n", p)
		}
		return ExitUsage
	}
	var in [][]byte
	if stages.NeedsCounts(*d, *l) {
		cb, err := stages.ExactCounts(*d, *l).Run(nil)
		if err != nil {
			fmt.Fprintf(e.stderr, "strata exact: %v\n", err)
			return ExitFail
		}
		in = append(in, cb)
	}
	b, err := stages.Exact(*d, *l, *beta).Run(in)
	if err != nil {
		fmt.Fprintf(e.stderr, "strata exact: %v\n", err)
		return ExitFail
	}
	var ex stages.ExactOut
	if err := json.Unmarshal(b, &ex); err != nil {
		fmt.Fprintf(e.stderr, "strata exact: %v\n", err)
		return ExitFail
	}
	fmt.Fprintf(e.stdout, "# exact reference: d=%d L=%d N=%d beta=%s (%s)\n", *d, *l, ex.N, stages.F(*beta), ex.Kind)
	fmt.Fprintf(e.stdout, "# first_zero %s\n", g(float64(ex.FirstZero)))
	if *d == 1 {
		fmt.Fprintf(e.stdout, "# lee_yang_edge %s\n", g(math.Asin(math.Exp(-2**beta))))
	}
	tp := stages.TransformParams{ThetaMin: *tmin, ThetaMax: *tmax, Points: *pts, MaxBits: *bits}
	grid := tp.Grid()
	sign, imm := stages.ExactOnGrid(&ex, grid, *bits)
	fmt.Fprint(e.stdout, string(csvTable([]string{"theta", "sign_exact", "im_m_exact"},
		[][]float64{grid, stages.Floats(sign), stages.Floats(imm)})))
	return ExitOK
}
