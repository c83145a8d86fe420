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
−ln|sign| ≈ Nχθ²/2 fitted over the reach. X must lie on the study's θ range.

Flags:
`

func (e *env) budgetCommand(args []string) int {
	fs := e.newFlagSet("budget", budgetUsage)
	var f studyFlags
	f.register(fs)
	theta := fs.Float64("theta", math.NaN(), "target θ for the reach")
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
		p, err := transform.Budget(curve, b.N, float64(tr.Reach), float64(tr.ZeroBracket[0]), float64(tr.ZeroBracket[1]),
			*theta, sweeps, st.Transform.ReachFactor, ex)
		if err != nil {
			fmt.Fprintf(tw, "%s\t%.0f\t%s\t\t\t\t%v\n", b.Branch.Dir(), sweeps, g(float64(tr.Reach)), err)
			failed++
			continue
		}
		fmt.Fprintf(tw, "%s\t%.0f\t%.4g\t%.3g\t%s\t%.3g\t%.3g\n", b.Branch.Dir(), sweeps, float64(tr.Reach), p.Sign, p.Source, p.Sigma, math.Ceil(p.Sweeps))
	}
	tw.Flush()
	fmt.Fprintf(e.stdout, "assumptions: σ_sign ∝ 1/√sweeps with the chains' autocorrelation unchanged; reach factor %v; a zero between the reach and X still stops the reach\n", st.Transform.ReachFactor)
	if failed > 0 {
		return ExitFail
	}
	return ExitOK
}
