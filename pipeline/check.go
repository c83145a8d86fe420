package pipeline

import (
	"encoding/json"
	"encoding/xml"
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"

	"strata/stages"
)

// Outcome is one evaluated expectation or baseline comparison.
type Outcome struct {
	Name     string
	Measured float64
	Error    float64
	Expected float64
	Pull     float64 // (measured − expected)/error; NaN when judged by tolerance
	Pass     bool
	Message  string
}

func (o Outcome) line() string {
	verdict := "pass"
	if !o.Pass {
		verdict = "FAIL"
	}
	if o.Message != "" {
		return fmt.Sprintf("%-4s %s: %s", verdict, o.Name, o.Message)
	}
	return fmt.Sprintf("%-4s %s: %.8g ± %.3g, expected %.8g, pull %s", verdict, o.Name, o.Measured, o.Error, o.Expected, fmtPull(o.Pull))
}

func fmtPull(p float64) string {
	if math.IsNaN(p) {
		return "—"
	}
	return fmt.Sprintf("%+.2f", p)
}

// BadExpectation is an expectation that names something that does not exist.
type BadExpectation struct{ Msg string }

func (b *BadExpectation) Error() string { return b.Msg }

// measured is a value, its error, and the exact reference (NaN if none).
type measured struct{ value, err, exact float64 }

// Evaluate checks the study's [[expect]] entries against the results.
func Evaluate(st *Study, res *Results) ([]Outcome, error) {
	var out []Outcome
	for i, e := range st.Expect {
		key := fmt.Sprintf("expect[%d] (%s)", i, e.Quantity)
		m, name, err := lookup(st, res, e)
		if err != nil {
			return nil, &BadExpectation{fmt.Sprintf("%s: %v", key, err)}
		}
		var want float64
		if e.Exact {
			if math.IsNaN(m.exact) {
				return nil, &BadExpectation{fmt.Sprintf("%s: no exact reference for %s", key, name)}
			}
			want = m.exact
		} else {
			want = *e.Value
		}
		o := Outcome{Name: name, Measured: m.value, Error: m.err, Expected: want, Pull: (m.value - want) / m.err}
		if m.err == 0 {
			o.Pull = math.NaN()
		}
		// rounding allowance, for quantities that are exact (error 0)
		d := math.Abs(m.value-want) - 1e-12*math.Max(1, math.Abs(want))
		if e.Tolerance > 0 {
			o.Pass = d <= e.Tolerance
		} else {
			o.Pass = d <= e.Sigma*m.err
		}
		if math.IsNaN(m.value) {
			o.Pass = false
			o.Message = "not measured (unresolved)"
		}
		out = append(out, o)
	}
	return out, nil
}

// checkExpectTargets checks, before anything runs, that every
// expectation names a branch, β, grid point and magnetization the study has.
func checkExpectTargets(st *Study, p *Plan) error {
	res := &Results{Plan: p}
	grid := stages.TransformParams{ThetaMin: st.Transform.ThetaMin, ThetaMax: st.Transform.ThetaMax, Points: st.Transform.ThetaPoints}.Grid()
	for i, e := range st.Expect {
		key := fmt.Sprintf("expect[%d] (%s)", i, e.Quantity)
		if e.Quantity == "theta_c" || e.Quantity == "exponent" {
			if e.Beta == nil {
				return fmt.Errorf("%s: needs beta", key)
			}
			found := false
			for _, sn := range p.Scaling {
				found = found || (sn.Beta == *e.Beta && sectorsName(sn.Sectors) == e.sectors())
			}
			if !found {
				return fmt.Errorf("%s: no beta %v with %s sectors in the study", key, *e.Beta, e.sectors())
			}
			continue
		}
		b, err := findBranch(res, e)
		if err != nil {
			return fmt.Errorf("%s: %v", key, err)
		}
		switch e.Quantity {
		case "sign", "im_m":
			if e.Theta == nil || gridIndex(grid, *e.Theta) < 0 {
				return fmt.Errorf("%s: theta must be a grid point of the study", key)
			}
		case "ln_rho":
			if b.Branch.Monomer() {
				return fmt.Errorf("%s: branch %s samples monomer sectors: use ln_D with n", key, b.Branch.Dir())
			}
			if e.M == nil || *e.M < -b.N || *e.M > b.N || (*e.M+b.N)%2 != 0 {
				return fmt.Errorf("%s: M must be a magnetization of the %d-site lattice", key, b.N)
			}
		case "ln_D":
			if !b.Branch.Monomer() {
				return fmt.Errorf("%s: branch %s samples magnetization sectors: use ln_rho with M (or sectors = \"monomer\")", key, b.Branch.Dir())
			}
			if e.N == nil || *e.N < 0 || *e.N > b.N || *e.N%2 != 0 {
				return fmt.Errorf("%s: n must be an even number of monomers in 0…%d", key, b.N)
			}
			if e.Exact && b.ExactD == nil {
				return fmt.Errorf("%s: branch %s has no exact monomer density (exact D needs exact counts: d = 1, 2D L ≤ 8, 3D L ≤ 3)", key, b.Branch.Dir())
			}
		}
		if e.Exact && b.Exact == nil && e.Quantity != "reach" {
			return fmt.Errorf("%s: branch %s has no exact reference", key, b.Branch.Dir())
		}
	}
	return nil
}

func findBranch(res *Results, e ExpectSpec) (*BranchNodes, error) {
	for _, b := range res.Plan.Branches {
		if e.Branch != "" {
			if b.Branch.Dir() == e.Branch {
				return b, nil
			}
			continue
		}
		if e.Beta != nil && b.Branch.L == e.Size && b.Branch.Beta == *e.Beta && b.Branch.Sectors == e.sectors() {
			return b, nil
		}
	}
	if e.Branch != "" {
		return nil, fmt.Errorf("no branch %q", e.Branch)
	}
	if e.Beta == nil || e.Size == 0 {
		return nil, fmt.Errorf("name a branch, or size and beta")
	}
	return nil, fmt.Errorf("no branch with size %d, beta %v and %s sectors", e.Size, *e.Beta, e.sectors())
}

func gridIndex(theta []float64, x float64) int {
	for i, t := range theta {
		if math.Abs(t-x) <= 1e-9*math.Max(1, math.Abs(x)) {
			return i
		}
	}
	return -1
}

func lookup(st *Study, res *Results, e ExpectSpec) (measured, string, error) {
	nan := math.NaN()
	switch e.Quantity {
	case "theta_c", "exponent":
		if e.Beta == nil {
			return measured{}, "", fmt.Errorf("%s needs beta", e.Quantity)
		}
		for _, sn := range res.Plan.Scaling {
			if sn.Beta != *e.Beta || sectorsName(sn.Sectors) != e.sectors() {
				continue
			}
			sc := res.Scaling[sn]
			name := fmt.Sprintf("%s beta=%s%s", e.Quantity, stages.F(sn.Beta), sectorsSuffix(sn.Sectors))
			if sc == nil || sc.ThetaC == nil {
				return measured{nan, nan, nan}, name, nil
			}
			if e.Quantity == "theta_c" {
				ex := nan
				if sc.ExactThetaC != nil {
					ex = *sc.ExactThetaC
				}
				return measured{sc.ThetaC.Value, sc.ThetaC.Error, ex}, name, nil
			}
			// y_h = d/(1+σ): 2 in 1D (transfer matrix), 12/5 in 2D (J. L. Cardy,
			// Phys. Rev. Lett. 54, 1354 (1985)); no exact value in 3D
			ex := map[int]float64{1: 2, 2: 2.4}[st.Model.Dimension]
			if st.Model.Dimension == 3 {
				ex = nan
			}
			return measured{sc.Exponent.Value, sc.Exponent.Error, ex}, name, nil
		}
		return measured{}, "", fmt.Errorf("no beta %v in the study", *e.Beta)
	}
	b, err := findBranch(res, e)
	if err != nil {
		return measured{}, "", err
	}
	name := e.Quantity + " " + b.Branch.Dir()
	tr, sv, ex := res.Transform[b], res.Stitch[b], res.Exact[b]
	if tr == nil || sv == nil {
		return measured{}, name, fmt.Errorf("branch %s has no results", b.Branch.Dir())
	}
	switch e.Quantity {
	case "first_zero":
		m := measured{nan, nan, float64(tr.ExactFirstZero)}
		if tr.FirstZero != nil {
			m.value, m.err = tr.FirstZero.Value, tr.FirstZero.Error
		}
		return m, name, nil
	case "reach":
		// the reach is known to one grid spacing
		dt := (st.Transform.ThetaMax - st.Transform.ThetaMin) / float64(st.Transform.ThetaPoints-1)
		return measured{float64(tr.Reach), dt, nan}, name, nil
	case "sign", "im_m":
		if e.Theta == nil {
			return measured{}, name, fmt.Errorf("%s needs theta", e.Quantity)
		}
		i := gridIndex(tr.Theta, *e.Theta)
		if i < 0 {
			return measured{}, name, fmt.Errorf("theta %v is not a grid point", *e.Theta)
		}
		name += " theta=" + stages.F(*e.Theta)
		if e.Quantity == "sign" {
			m := measured{float64(tr.Sign[i]), float64(tr.SignErr[i]), nan}
			if tr.HasExact {
				m.exact = float64(tr.SignExact[i])
			}
			return m, name, nil
		}
		m := measured{float64(tr.ImM[i]), float64(tr.ImMErr[i]), nan}
		if tr.HasExact {
			m.exact = float64(tr.ImMExact[i])
		}
		return m, name, nil
	case "ln_rho":
		if e.M == nil {
			return measured{}, name, fmt.Errorf("ln_rho needs M")
		}
		k := (*e.M + sv.N) / 2
		if *e.M < -sv.N || *e.M > sv.N || (*e.M+sv.N)%2 != 0 {
			return measured{}, name, fmt.Errorf("magnetization %d is impossible on %d sites", *e.M, sv.N)
		}
		name += fmt.Sprintf(" M=%d", *e.M)
		m := measured{sv.LnRho[k], sv.LnRhoErr[k], nan}
		if ex != nil && ex.LnRho != nil {
			m.exact = ex.LnRho[k]
		}
		return m, name, nil
	case "ln_D":
		if e.N == nil || *e.N < 0 || *e.N%2 != 0 || *e.N/2 >= len(sv.LnRho) || sv.Sectors != stages.Monomer {
			return measured{}, name, fmt.Errorf("ln_D needs a monomer branch and an even n in 0…N")
		}
		k := *e.N / 2
		name += fmt.Sprintf(" n=%d", *e.N)
		m := measured{sv.LnRho[k], sv.LnRhoErr[k], nan}
		if xd := res.ExactD[b]; xd != nil {
			m.exact = xd.LnD[k]
		}
		return m, name, nil
	}
	return measured{}, name, fmt.Errorf("unknown quantity %q", e.Quantity)
}

// headline flattens a summary into named numbers with errors.
func headline(s Summary) map[string][2]float64 {
	out := map[string][2]float64{}
	for _, b := range s.Branches {
		if b.FirstZero != nil {
			out["first_zero "+b.Dir] = [2]float64{b.FirstZero.Value, b.FirstZero.Error}
		}
		for _, r := range b.Routes {
			// the cumulant routes' zeros (direct is first_zero; fits carry no error)
			if r.FirstZero != nil && r.Route != stages.RouteDirect && !math.IsNaN(float64(r.FirstZero.Error)) {
				out["first_zero "+b.Dir+" route="+r.Route] = [2]float64{float64(r.FirstZero.Value), float64(r.FirstZero.Error)}
			}
		}
	}
	for _, sc := range s.Scaling {
		if sc.ThetaC != nil {
			tag := stages.F(sc.Beta) + sectorsSuffix(sc.Sectors)
			out["theta_c beta="+tag] = [2]float64{sc.ThetaC.Value, sc.ThetaC.Error}
			out["exponent beta="+tag] = [2]float64{sc.Exponent.Value, sc.Exponent.Error}
		}
	}
	return out
}

// CompareBaseline compares every headline number with a stored summary
// using the combined error, pull = Δ/√(σ₁² + σ₂²). A number present in the
// baseline but gone now (an unresolved zero) fails; a new one is reported.
func CompareBaseline(cur, base Summary, sigma float64) []Outcome {
	a, b := headline(cur), headline(base)
	var names []string
	for k := range b {
		names = append(names, k)
	}
	for k := range a {
		if _, ok := b[k]; !ok {
			names = append(names, k)
		}
	}
	sort.Strings(names)
	var out []Outcome
	for _, k := range names {
		x, inCur := a[k]
		y, inBase := b[k]
		o := Outcome{Name: "baseline " + k}
		switch {
		case !inCur:
			o.Message = fmt.Sprintf("vanished (baseline %.8g ± %.3g)", y[0], y[1])
		case !inBase:
			o.Pass = true
			o.Message = fmt.Sprintf("appeared: %.8g ± %.3g (not in the baseline)", x[0], x[1])
		default:
			s := math.Hypot(x[1], y[1])
			o.Measured, o.Error, o.Expected = x[0], s, y[0]
			o.Pull = (x[0] - y[0]) / s
			o.Pass = math.Abs(x[0]-y[0]) <= sigma*s
			if s == 0 {
				o.Pull = math.NaN()
				o.Pass = x[0] == y[0]
			}
		}
		out = append(out, o)
	}
	return out
}

// JUnit XML, in the layout CI report viewers read.
type junitSuites struct {
	XMLName xml.Name     `xml:"testsuites"`
	Suites  []junitSuite `xml:"testsuite"`
}

type junitSuite struct {
	Name     string      `xml:"name,attr"`
	Tests    int         `xml:"tests,attr"`
	Failures int         `xml:"failures,attr"`
	Errors   int         `xml:"errors,attr"`
	Time     string      `xml:"time,attr"`
	Cases    []junitCase `xml:"testcase"`
}

type junitCase struct {
	Name      string        `xml:"name,attr"`
	Classname string        `xml:"classname,attr"`
	Time      string        `xml:"time,attr"`
	Failure   *junitFailure `xml:"failure,omitempty"`
}

type junitFailure struct {
	Message string `xml:"message,attr"`
	Type    string `xml:"type,attr"`
	Text    string `xml:",chardata"`
}

// WriteJUnit writes one test case per outcome.
func WriteJUnit(w io.Writer, study string, outs []Outcome) error {
	s := junitSuite{Name: "strata check " + study, Tests: len(outs), Time: "0"}
	for _, o := range outs {
		c := junitCase{Name: o.Name, Classname: "strata." + study, Time: "0"}
		if !o.Pass {
			s.Failures++
			c.Failure = &junitFailure{Message: o.line(), Type: "physics", Text: o.line()}
		}
		s.Cases = append(s.Cases, c)
	}
	b, err := xml.MarshalIndent(junitSuites{Suites: []junitSuite{s}}, "", "  ")
	if err != nil {
		return err
	}
	_, err = io.WriteString(w, xml.Header+string(b)+"\n")
	return err
}

// check evaluates expectations (and a baseline) after a run.
func (e *env) check(st *Study, res *Results, baseline, junit string, sigma float64) int {
	outs, err := Evaluate(st, res)
	if err != nil {
		fmt.Fprintf(e.stderr, "strata check: bad expectation: %v\n", err)
		return ExitUsage
	}
	if baseline != "" {
		b, err := os.ReadFile(baseline)
		if err != nil {
			fmt.Fprintf(e.stderr, "strata check: --baseline: %v\n", err)
			return ExitUsage
		}
		var base Summary
		if err := json.Unmarshal(b, &base); err != nil {
			fmt.Fprintf(e.stderr, "strata check: --baseline %s: %v\n", baseline, err)
			return ExitUsage
		}
		outs = append(outs, CompareBaseline(res.BuildSummary(), base, sigma)...)
	}
	if len(outs) == 0 {
		fmt.Fprintln(e.stderr, "strata check: the study has no [[expect]] entries and no --baseline was given")
		return ExitUsage
	}
	failed := 0
	for _, o := range outs {
		fmt.Fprintln(e.stdout, o.line())
		if !o.Pass {
			failed++
		}
	}
	fmt.Fprintf(e.stdout, "%d passed, %d failed\n", len(outs)-failed, failed)
	if junit != "" {
		var b strings.Builder
		if err := WriteJUnit(&b, st.Name, outs); err != nil {
			fmt.Fprintln(e.stderr, err)
			return ExitFail
		}
		if err := writeFileAtomic(junit, []byte(b.String())); err != nil {
			fmt.Fprintf(e.stderr, "strata check: --junit: %v\n", err)
			return ExitFail
		}
	}
	if failed > 0 {
		return ExitFail
	}
	return ExitOK
}

// baselineRefusal says why a baseline must not be refreshed from the study
// at path: it is not in a git checkout, or the checkout has uncommitted
// changes under stages/ or pipeline/ (the code that makes the numbers).
// The empty string means go ahead.
func baselineRefusal(path string) string {
	dir := filepath.Dir(path)
	top, err := exec.Command("git", "-C", dir, "rev-parse", "--show-toplevel").Output()
	if err != nil {
		return "the study is not in a git checkout (or git is missing)"
	}
	root := strings.TrimSpace(string(top))
	st, err := exec.Command("git", "-C", root, "status", "--porcelain", "--", "stages", "pipeline").Output()
	if err != nil {
		return fmt.Sprintf("git status failed in %s: %v", root, err)
	}
	if s := strings.TrimSpace(string(st)); s != "" {
		lines := strings.Split(s, "\n")
		if len(lines) > 5 {
			lines = append(lines[:5], "…")
		}
		return "uncommitted changes under stages/ or pipeline/: " + strings.Join(lines, "; ")
	}
	return ""
}

// refreshBaseline writes the run's summary as the new baseline, after
// checking that every [[expect]] entry holds.
func (e *env) refreshBaseline(st *Study, res *Results, baseline string) int {
	outs, err := Evaluate(st, res)
	if err != nil {
		fmt.Fprintf(e.stderr, "strata check: bad expectation: %v\n", err)
		return ExitUsage
	}
	for _, o := range outs {
		if !o.Pass {
			fmt.Fprintf(e.stderr, "strata check: refusing to refresh %s: %s\n", baseline, o.line())
			return ExitFail
		}
	}
	b, err := json.MarshalIndent(res.BuildSummary(), "", "  ")
	if err != nil {
		fmt.Fprintln(e.stderr, err)
		return ExitFail
	}
	if err := writeFileAtomic(baseline, append(b, '\n')); err != nil {
		fmt.Fprintf(e.stderr, "strata check: --baseline: %v\n", err)
		return ExitFail
	}
	fmt.Fprintf(e.stdout, "baseline %s refreshed (%d expectations hold)\n", baseline, len(outs))
	return ExitOK
}
