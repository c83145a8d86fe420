package pipeline

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"runtime"

	"strata/cache"

	"strata/stages"
)

const exactUsage = `Usage: strata exact --dimension D --size L --beta B [--theta-min X] [--theta-max X] [--theta-points N] [--cache DIR] [--sectors monomer]

Prints exact references for the periodic L^d lattice as CSV on stdout
(theta,sign_exact,im_m_exact; sign = Z(β,iθ)/Z(β,0), im_m = Im<M>/N), after
comment lines (#) with the first zero, its precision and, in d = 1, the
Lee–Yang edge. Available: d = 1 any L (closed forms); d = 2 with L ≤ 8
(integer counts) and L ≤ 12 (floating-point transfer matrix at fixed β,
3.5 s at 12×12); d = 3 with L ≤ 3 (enumeration) and L = 4 (transfer matrix,
about 40 s). Grid points whose exact value the inputs' precision does not
support are NaN. The transfer-matrix result is kept in the cache (--cache,
default $STRATA_CACHE; none when both are empty), shared with studies.

With --sectors monomer it prints n,ln_D_exact instead: ln D(n) − ln D(0) of
the link (monomer) representation, by the ring's link transfer matrix
(rings of 3 … 4096 sites) or from exact integer counts by the Krawtchouk
transform (d = 2 with L ≤ 8, d = 3 with L ≤ 3), never from a
floating-point ρ.

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
	sectors := fs.String("sectors", "magnetization", "magnetization (sign and Im m on the θ grid) or monomer (ln D(n)/D(0) of the link representation)")
	cacheDir := fs.String("cache", os.Getenv("STRATA_CACHE"), "cache directory for the transfer-matrix result (default $STRATA_CACHE; empty: no cache)")
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
	if !(*tmin >= 0 && *tmax <= math.Pi/2 && *tmax > *tmin) || *pts < 2 || *pts > 1000001 {
		probs = append(probs, "need 0 ≤ theta-min < theta-max ≤ π/2 and 2 ≤ theta-points ≤ 1000001")
	}
	if *bits < 256 || *bits > 1<<20 {
		probs = append(probs, fmt.Sprintf("--max-bits %d must be in 256..%d", *bits, 1<<20))
	}
	if *l > 1<<24 {
		probs = append(probs, fmt.Sprintf("--size %d exceeds %d", *l, 1<<24))
	}
	if *sectors != "magnetization" && *sectors != "monomer" {
		probs = append(probs, fmt.Sprintf("--sectors %q must be magnetization or monomer", *sectors))
	}
	kind := ""
	if len(probs) == 0 {
		var why string
		if kind, why = stages.ExactKind(*d, *l, *beta, math.MaxInt); kind == "" {
			probs = append(probs, why)
		}
	}
	if len(probs) == 0 && *sectors == "monomer" {
		switch {
		case kind == stages.ExactDensity:
			probs = append(probs, "the monomer density D(n) needs exact integer counts (d = 1; d = 2 with L ≤ 8; d = 3 with L ≤ 3): the Krawtchouk transform amplifies a floating-point ρ's rounding by up to C(N, n)")
		case !stages.MonomerExactAvailable(*d, *l):
			probs = append(probs, fmt.Sprintf("no exact monomer density for %d^%d (rings of 3 … %d sites; d = 2 with L ≤ 8; d = 3 with L ≤ 3)", *l, *d, stages.MaxMonomerRing))
		}
	}
	if len(probs) > 0 {
		for _, p := range probs {
			fmt.Fprintf(e.stderr, "strata exact: %s\n", p)
		}
		return ExitUsage
	}
	var c *cache.Cache
	if *cacheDir != "" {
		var err error
		if c, err = cache.Open(*cacheDir); err != nil {
			fmt.Fprintf(e.stderr, "strata exact: %v\n", err)
			return ExitFail
		}
	}
	var in []*Node
	switch kind {
	case stages.ExactCounts:
		in = append(in, newNode(stages.ExactCountsTask(*d, *l), "", ""))
	case stages.ExactDensity:
		dn := newNode(stages.ExactDensityTask(*d, *l, *beta), "", "")
		if c == nil || !c.Has(dn.Key) {
			fmt.Fprintf(e.stderr, "strata exact: computing ρ_β(M) of %d^%d at β = %s by the floating-point transfer matrix on %d CPUs…\n",
				*l, *d, stages.F(*beta), runtime.GOMAXPROCS(0))
		}
		in = append(in, dn)
	}
	if *sectors == "monomer" {
		return e.exactMonomer(c, *d, *l, *beta, in, *bits)
	}
	var ex stages.ExactOut
	if err := e.runDecode(c, newNode(stages.Exact(*d, *l, *beta, kind), "", "", in...), &ex); err != nil {
		fmt.Fprintf(e.stderr, "strata exact: %v\n", err)
		return ExitFail
	}
	fmt.Fprintf(e.stdout, "# exact reference: d=%d L=%d N=%d beta=%s (%s)\n", *d, *l, ex.N, stages.F(*beta), ex.Kind)
	fmt.Fprintf(e.stdout, "# first_zero %s\n", g(float64(ex.FirstZero)))
	maxErr := 0.0
	for _, v := range ex.LnRhoErr {
		maxErr = math.Max(maxErr, v)
	}
	inputs := "exact inputs"
	if ex.RelErr > 0 {
		inputs = fmt.Sprintf("rho relative error ≤ %s, sign NaN where |sign| < %s", g(ex.RelErr), g(ex.RelErr/stages.SupportedDigits))
	}
	lnRho := fmt.Sprintf("ln_rho ± %s (absolute)", g(maxErr))
	if ex.LnRho == nil {
		lnRho = fmt.Sprintf("no ρ(M) table above N = %d (closed forms only)", stages.MaxRingTable)
	}
	fmt.Fprintf(e.stdout, "# precision: first_zero ± %s, %s; %s\n", g(float64(ex.FirstZeroErr)), lnRho, inputs)
	if *d == 1 {
		fmt.Fprintf(e.stdout, "# lee_yang_edge %s\n", g(math.Asin(math.Exp(-2**beta))))
	}
	tp := stages.TransformParams{ThetaMin: *tmin, ThetaMax: *tmax, Points: *pts, MaxBits: *bits}
	grid := tp.Grid()
	sign, imm := stages.ExactOnGrid(&ex, grid, *bits)
	nan := 0
	for _, v := range sign {
		if math.IsNaN(float64(v)) {
			nan++
		}
	}
	if nan == len(sign) {
		fmt.Fprintf(e.stderr, "strata exact: no grid point is computable to the stated precision (raise --max-bits or the inputs' precision)\n")
		return ExitFail
	}
	if nan > 0 {
		fmt.Fprintf(e.stdout, "# nan: %d of %d grid points, where |sign| is below what the precision supports\n", nan, len(sign))
	}
	fmt.Fprint(e.stdout, string(csvTable([]string{"theta", "sign_exact", "im_m_exact"},
		[][]float64{grid, stages.Floats(sign), stages.Floats(imm)})))
	return ExitOK
}

// runDecode runs a node (runCached) and decodes its JSON output into v.
func (e *env) runDecode(c *cache.Cache, n *Node, v any) error {
	b, err := e.runCached(c, n)
	if err != nil {
		return err
	}
	return json.Unmarshal(b, v)
}

// runCached computes a node and its inputs, reusing and filling the cache
// when there is one (a cache that cannot store is a warning, not an error).
func (e *env) runCached(c *cache.Cache, n *Node) ([]byte, error) {
	if c != nil {
		if b, err := c.Get(n.Key); err == nil {
			return b, nil
		}
	}
	inputs := make([][]byte, len(n.Inputs))
	for i, in := range n.Inputs {
		b, err := e.runCached(c, in)
		if err != nil {
			return nil, err
		}
		inputs[i] = b
	}
	out, err := n.Task.Run(inputs)
	if err != nil {
		return nil, err
	}
	if c != nil {
		if err := c.Put(n.Key, out); err != nil {
			fmt.Fprintf(e.stderr, "strata exact: warning: not cached: %v\n", err)
		}
	}
	return out, nil
}

// exactMonomer prints n,ln_D_exact: ln[D(n)/D(0)] of the link (monomer)
// representation, by the ring's link transfer matrix or from exact integer
// counts by the Krawtchouk transform (the exact_monomer stage, cached).
func (e *env) exactMonomer(c *cache.Cache, d, l int, beta float64, in []*Node, maxBits int) int {
	var out stages.MonomerExactOut
	if err := e.runDecode(c, newNode(stages.ExactMonomer(d, l, beta, maxBits), "", "", in...), &out); err != nil {
		fmt.Fprintf(e.stderr, "strata exact: %v\n", err)
		return ExitFail
	}
	fmt.Fprintf(e.stdout, "# monomer density of states: d=%d L=%d N=%d beta=%s; ln D(n) − ln D(0), t = tanh β, by the %s\n",
		d, l, out.N, stages.F(beta), out.Source)
	ns := make([]float64, len(out.LnD))
	for i := range ns {
		ns[i] = float64(2 * i)
	}
	fmt.Fprint(e.stdout, string(csvTable([]string{"n", "ln_D_exact"}, [][]float64{ns, out.LnD})))
	return ExitOK
}
