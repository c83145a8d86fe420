package pipeline

import (
	"fmt"
	"math"
	"text/tabwriter"

	"strata/cache"
	"strata/stages"
	"strata/stages/transform"
)

const budgetUsage = `Usage: strata budget STUDY.toml --theta X [flags]

Reads a finished run's cached results and predicts, per branch, the
measured sweeps per sector needed to push the reach to θ = X. The error of
the sign falls as 1/√sweeps; sign(X) is the exact value where one exists,
the measured one inside the reach, and otherwise extrapolated from
−ln|sign| ≈ Nχθ²/2 fitted over the reach. The answer is the sweeps at
which a fraction --probability (default 0.9) of independent runs reach X:
a run's sign at X scatters by σ ∝ 1/√sweeps, so S* = S·(σ(X)(f + z_P)/|sign(X)|)².
X must lie on the study's θ range and below the first zero (exact where
known, else resolved): beyond it the reach depends on the grid.

Flags:
`

func (e *env) budgetCommand(args []string) int {
	fs := e.newFlagSet("budget", budgetUsage)
	var f studyFlags
	f.register(fs)
	theta := fs.Float64("theta", math.NaN(), "target θ for the reach (below the first zero)")
	prob := fs.Float64("probability", 0.9, "fraction of independent runs that should reach θ")
	pos, code, done := e.parse(fs, args)
	if done {
		return code
	}
	if math.IsNaN(*theta) {
		fmt.Fprintln(e.stderr, "strata budget: --theta X is required")
		return ExitUsage
	}
	st, code, ok := e.loadStudy("budget", pos, &f)
	if !ok {
		return code
	}
	c, err := cache.Open(f.cacheDir)
	if err != nil {
		fmt.Fprintln(e.stderr, err)
		return ExitFail
	}
	plan := BuildPlan(st)
	res := LoadResults(c, plan)
	sweeps := float64(st.Chunks() * st.Sample.ChunkSweeps)
	tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
	fmt.Fprintf(tw, "branch\tsweeps now\treach now\t|sign(X)|\tsource\tsigma(X)\tsweeps needed\n")
	failed := 0
	for _, b := range plan.Branches {
		tr := res.Transform[b]
		if tr == nil {
			fmt.Fprintf(tw, "%s\t—\tnot run\t\t\t\t\n", b.Branch.Dir())
			failed++
			continue
		}
		curve := &transform.Curve{Theta: tr.Theta, Sign: stages.Floats(tr.Sign), SignErr: stages.Floats(tr.SignErr)}
		ex := math.NaN()
		if e := res.Exact[b]; e != nil {
			s, _ := stages.ExactOnGrid(e, []float64{*theta}, st.Exact.MaxBits)
			ex = float64(s[0])
		}
		zero := float64(tr.ExactFirstZero)
		if math.IsNaN(zero) && tr.FirstZero != nil {
			zero = tr.FirstZero.Value
		}
		p, err := transform.Budget(curve, transform.BudgetInput{N: b.N, Reach: float64(tr.Reach), Lo: float64(tr.ZeroBracket[0]),
			Hi: float64(tr.ZeroBracket[1]), Zero: zero, X: *theta, Sweeps: sweeps, Factor: st.Transform.ReachFactor,
			ExactSign: ex, Probability: *prob})
		if err != nil {
			fmt.Fprintf(tw, "%s\t%.0f\t%s\t\t\t\t%v\n", b.Branch.Dir(), sweeps, g(float64(tr.Reach)), err)
			failed++
			continue
		}
		fmt.Fprintf(tw, "%s\t%.0f\t%.4g\t%.3g\t%s\t%.3g\t%.3g\n", b.Branch.Dir(), sweeps, float64(tr.Reach), p.Sign, p.Source, p.Sigma, math.Ceil(p.Sweeps))
	}
	tw.Flush()
	fmt.Fprintf(e.stdout, "sweeps needed: per sector, for %.0f%% of independent runs to reach θ = %s (calibrated on this run's σ(θ), its pilot)\n", 100**prob, stages.F(*theta))
	fmt.Fprintf(e.stdout, "assumptions: σ_sign ∝ 1/√sweeps with the chains' autocorrelation unchanged; a run reaches θ when |sign| ≥ %v·σ there; targets at or beyond the first zero are refused\n", st.Transform.ReachFactor)
	if failed > 0 {
		return ExitFail
	}
	return ExitOK
}
