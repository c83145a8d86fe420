package pipeline

import (
	"bytes"
	"encoding/gob"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"

	"strata/cache"
	"strata/pipeline/report"
	"strata/stages"
	"strata/stages/transform"
)

// sizeColor gives each size the same colour in every figure.
func sizeColor(st *Study, l int) int {
	sizes := append([]int(nil), st.Model.Sizes...)
	sort.Ints(sizes)
	return sort.SearchInts(sizes, l)
}

const thetaLabel = "θ = Im h  (h = βH)"

func abs(x []float64) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = math.Abs(v)
	}
	return out
}

// branchFigures builds the four figures of a branch from its tables.
func (r *Results) branchFigures(b *BranchNodes, tables map[string]*table) []report.Figure {
	st := r.Plan.Study
	c := sizeColor(st, b.Branch.L)
	tag := fmt.Sprintf("L=%d, β=%s", b.Branch.L, stages.F(b.Branch.Beta))
	// the density's columns and labels by representation
	lab, ln, xl, yl, rl, rt := "M", "ln_rho", "M (total magnetization)", "ln ρ(M)", "M", "r(M) = ρ(M)/ρ(M−2)"
	if b.Branch.Monomer() {
		tag += ", monomer sectors"
		lab, ln, xl, yl, rl, rt = "n", "ln_D", "n (number of monomers)", "ln D(n)/D(0)", "n", "D(n)/D(n−2)"
	}
	var figs []report.Figure
	if d := tables["density"]; d != nil {
		main := report.Panel{Title: "density of states, " + tag, XLabel: xl, YLabel: yl,
			Series: []report.Series{{Label: "Monte Carlo", Kind: report.Points, X: d.col(lab), Y: d.col(ln), Err: d.col(ln + "_err"), Color: c}}}
		f := report.Figure{Name: b.Branch.Dir() + "_density"}
		if ex := d.col(ln + "_exact"); ex != nil {
			main.Series = append(main.Series, report.Series{Label: "exact", Kind: report.Dashed, X: d.col(lab), Y: ex, Color: 6, Exact: true})
			mc, er := d.col(ln), d.col(ln+"_err")
			pull := make([]float64, len(mc))
			for i := range mc {
				pull[i] = math.NaN()
				if er[i] > 0 {
					pull[i] = (mc[i] - ex[i]) / er[i]
				}
			}
			n := float64(b.N)
			xmin := -n
			if b.Branch.Monomer() {
				xmin = 0
			}
			f.Panels = []report.Panel{main, {XLabel: lab, YLabel: "pull", YMin: -4, YMax: 4, XMin: xmin, XMax: n,
				Series: []report.Series{{Kind: report.Points, X: d.col(lab), Y: pull, Color: c}}}}
		} else {
			f.Panels = []report.Panel{main}
		}
		figs = append(figs, f)
	}
	if q := tables["ratios"]; q != nil {
		figs = append(figs, report.Figure{Name: b.Branch.Dir() + "_ratio_error", Panels: []report.Panel{{
			Title: "relative error of " + rt + ", " + tag, XLabel: rl, YLabel: "σ(ln r)", LogY: true,
			Series: []report.Series{{Label: tag, Kind: report.Points, X: q.col(rl), Y: q.col("ln_ratio_err"), Color: c}}}}})
	}
	if t := tables["transform"]; t != nil {
		tr := r.Transform[b]
		sign := report.Panel{Title: "sign = Z(iθ)/Z(0), " + tag, XLabel: thetaLabel, YLabel: "|sign(θ)|", LogY: true,
			Series: []report.Series{{Label: "Monte Carlo ± σ", Kind: report.Band, X: t.col("theta"), Y: abs(t.col("sign")), Err: t.col("sign_err"), Color: c}}}
		imm := report.Panel{Title: "Im m = Im<M>/N, " + tag, XLabel: thetaLabel, YLabel: "Im m(θ)",
			Series: []report.Series{{Label: "Monte Carlo ± σ", Kind: report.Band, X: t.col("theta"), Y: t.col("im_m"), Err: t.col("im_m_err"), Color: c}}}
		if ex := t.col("sign_exact"); ex != nil {
			sign.Series = append(sign.Series, report.Series{Label: "exact", Kind: report.Dashed, X: t.col("theta"), Y: abs(ex), Color: 6, Exact: true})
			imm.Series = append(imm.Series, report.Series{Label: "exact", Kind: report.Dashed, X: t.col("theta"), Y: t.col("im_m_exact"), Color: 6, Exact: true})
		}
		sign.Marks = append(sign.Marks, report.Mark{Label: "reach", X: float64(tr.Reach), Color: c})
		if tr.FirstZero != nil {
			sign.Marks = append(sign.Marks, report.Mark{Label: "first zero", X: tr.FirstZero.Value, Color: c})
		}
		if ez := float64(tr.ExactFirstZero); !math.IsNaN(ez) {
			sign.Marks = append(sign.Marks, report.Mark{Label: "exact zero", X: ez, Color: 6})
		}
		// Im m diverges at the zero: show the range up to 3× its value at the bracket
		ymax := math.NaN()
		if tr.FirstZero != nil {
			imm.Marks = append(imm.Marks, report.Mark{Label: "first zero", X: tr.FirstZero.Value, Color: c})
			th, im := t.col("theta"), t.col("im_m")
			for i := range th {
				if th[i] <= float64(tr.ZeroBracket[0]) {
					ymax = 2 * math.Abs(im[i])
				}
			}
		}
		if ez := float64(tr.ExactFirstZero); !math.IsNaN(ez) {
			imm.Marks = append(imm.Marks, report.Mark{Label: "exact zero", X: ez, Color: 6})
		}
		if !math.IsNaN(ymax) && ymax > 0 {
			imm.YMin, imm.YMax = -ymax, ymax
		}
		figs = append(figs, report.Figure{Name: b.Branch.Dir() + "_sign", Panels: []report.Panel{sign}},
			report.Figure{Name: b.Branch.Dir() + "_im_m", Panels: []report.Panel{imm}})
		if len(tr.Fits) > 0 {
			fp := report.Panel{Title: "raw and smoothed Im m, " + tag, XLabel: thetaLabel, YLabel: "Im m(θ)", YMin: imm.YMin, YMax: imm.YMax,
				Series: []report.Series{{Label: "raw ± σ", Kind: report.Band, X: t.col("theta"), Y: t.col("im_m"), Err: t.col("im_m_err"), Color: c}}}
			for i, f := range tr.Fits {
				// fits: solid, black to light grey by degree (sizes keep the palette)
				sh := 0.65 * float64(i) / math.Max(1, float64(len(tr.Fits)-1))
				fp.Series = append(fp.Series, report.Series{Label: fmt.Sprintf("fit degree %d", f.Degree), Kind: report.Line,
					X: t.col("theta"), Y: t.col(fmt.Sprintf("im_m_fit%d", f.Degree)), Color: 6, Shade: sh, Glyph: i + 2})
				fp.Marks = append(fp.Marks, report.Mark{Label: fmt.Sprintf("bias onset, degree %d", f.Degree), X: float64(f.BiasOnset), Color: 6})
			}
			figs = append(figs, report.Figure{Name: b.Branch.Dir() + "_fit", Panels: []report.Panel{fp}})
		}
	}
	figs = append(figs, r.routeFigures(b, tables, c, tag)...)
	return figs
}

// routeStyles gives each phase route its line style (route → line style).
var routeStyles = map[string]report.Kind{stages.RoutePhase2: report.Dashed, stages.RoutePhase4: report.Dotted,
	stages.RouteSeries2: report.DashDot, stages.RouteSeries4: report.LongDash}

// routeFigures draws the phase expansions against the direct sum and the
// convergence of the cumulant estimates of the first zero with the order.
func (r *Results) routeFigures(b *BranchNodes, tables map[string]*table, c int, tag string) []report.Figure {
	rt, t, cu := tables["routes"], tables["transform"], tables["cumulants"]
	if rt == nil || t == nil || cu == nil {
		return nil
	}
	sign := report.Panel{Title: "routes to the average sign, " + tag, XLabel: thetaLabel, YLabel: "|sign(θ)|", LogY: true,
		Series: []report.Series{{Label: "direct sum ± σ", Kind: report.Band, X: t.col("theta"), Y: abs(t.col("sign")), Err: t.col("sign_err"), Color: c}}}
	for _, name := range stages.PhaseRoutes {
		sign.Series = append(sign.Series, report.Series{Label: name, Kind: routeStyles[name], X: rt.col("theta"), Y: rt.col("sign_" + name), Color: c})
	}
	if ex := t.col("sign_exact"); ex != nil {
		sign.Series = append(sign.Series, report.Series{Label: "exact", Kind: report.Dashed, X: t.col("theta"), Y: abs(ex), Color: 6, Exact: true})
	}
	ez := math.NaN()
	if tr := r.Transform[b]; tr != nil {
		ez = float64(tr.ExactFirstZero)
	}
	conv := report.Panel{Title: "cumulant estimates of θ_1, " + tag, XLabel: "highest cumulant order n",
		YLabel: "θ_1 estimate"}
	if !math.IsNaN(ez) {
		conv.YLabel, conv.LogY, conv.Title = "|Δθ_1|", true, "cumulant θ_1 − exact θ_1, "+tag
	}
	hs, orders, th, er := cu.col("h"), cu.col("order"), cu.col("theta1"), cu.col("theta1_err")
	var fields []float64
	for i, h := range hs {
		if i == 0 || h != hs[i-1] {
			fields = append(fields, h)
		}
	}
	for fi, h := range fields {
		var x, y, e []float64
		for i := range hs {
			if hs[i] == h && !math.IsNaN(th[i]) {
				x = append(x, orders[i])
				if math.IsNaN(ez) {
					y = append(y, th[i])
				} else {
					y = append(y, math.Abs(th[i]-ez))
				}
				e = append(e, er[i])
			}
		}
		conv.Series = append(conv.Series, report.Series{Label: "h = " + stages.F(h), Kind: report.Points, X: x, Y: y, Err: e,
			Color: 6, Shade: 0.3 * float64(fi%3), Glyph: fi + 1})
	}
	return []report.Figure{{Name: b.Branch.Dir() + "_routes", Panels: []report.Panel{sign}},
		{Name: b.Branch.Dir() + "_cumulants", Panels: []report.Panel{conv}}}
}

// studyFigures builds the per-β scaling figures and the reach comparison.
func (r *Results) studyFigures() []report.Figure {
	st := r.Plan.Study
	var figs []report.Figure
	for _, sn := range r.Plan.Scaling {
		sc := r.Scaling[sn]
		if sc == nil {
			continue
		}
		y := 2.0
		if sc.Exponent != nil {
			y = sc.Exponent.Value
		}
		rep := ""
		if sn.Sectors == stages.Monomer {
			rep = ", monomer sectors"
		}
		p := report.Panel{Title: fmt.Sprintf("first zero against L^{−y}, β=%s%s (y = %.3g)", stages.F(sc.Beta), rep, y),
			XLabel: "L^{−y}", YLabel: "θ_1(L)"}
		for _, pt := range sc.Points {
			x := math.Pow(float64(pt.L), -y)
			if pt.Theta1 != nil {
				p.Series = append(p.Series, report.Series{Label: fmt.Sprintf("L=%d", pt.L), Kind: report.Points,
					X: []float64{x}, Y: []float64{*pt.Theta1}, Err: []float64{*pt.Theta1Err}, Color: sizeColor(st, pt.L)})
			}
		}
		var ex, ey []float64
		for _, pt := range sc.Points {
			if pt.Theta1Exact != nil {
				ex = append(ex, math.Pow(float64(pt.L), -y))
				ey = append(ey, *pt.Theta1Exact)
			}
		}
		if len(ex) > 0 {
			p.Series = append(p.Series, report.Series{Label: "exact zeros", Kind: report.Dashed, X: ex, Y: ey, Color: 6, Exact: true})
		}
		if sc.ThetaC != nil {
			xmax := 0.0
			for _, pt := range sc.Points {
				xmax = math.Max(xmax, math.Pow(float64(pt.L), -y))
			}
			xs := []float64{0, xmax / 2, xmax}
			ys := make([]float64, 3)
			for i, x := range xs {
				ys[i] = sc.ThetaC.Value + sc.Amplitude.Value*x
			}
			p.Series = append(p.Series, report.Series{Label: fmt.Sprintf("fit, θ_c = %.5g ± %.2g", sc.ThetaC.Value, sc.ThetaC.Error),
				Kind: report.Line, X: xs, Y: ys, Color: 6})
			if sc.ExactThetaC != nil {
				p.Series = append(p.Series, report.Series{Label: "exact θ_c", Kind: report.Points,
					X: []float64{0}, Y: []float64{*sc.ExactThetaC}, Color: 6, Exact: true})
			}
		}
		figs = append(figs, report.Figure{Name: "scaling_beta" + stages.F(sc.Beta) + sectorsSuffix(sn.Sectors), Panels: []report.Panel{p}})
	}
	figs = append(figs, r.ladderFigures()...)
	figs = append(figs, r.comparisonFigures()...)
	reach := report.Panel{Title: "average sign and reach of every size", XLabel: thetaLabel, YLabel: "|sign(θ)|", LogY: true}
	for _, b := range r.Plan.Branches {
		tr := r.Transform[b]
		if tr == nil || b.Branch.Monomer() {
			continue // monomer branches: the comparison figures
		}
		c := sizeColor(st, b.Branch.L)
		label := fmt.Sprintf("L=%d β=%s", b.Branch.L, stages.F(b.Branch.Beta))
		reach.Series = append(reach.Series, report.Series{Label: label, Kind: report.Line, X: tr.Theta, Y: abs(stages.Floats(tr.Sign)), Color: c})
		reach.Marks = append(reach.Marks, report.Mark{X: float64(tr.Reach), Color: c})
	}
	if len(reach.Series) > 0 {
		figs = append(figs, report.Figure{Name: "reach", Panels: []report.Panel{reach}})
	}
	return figs
}

// ladderFigures draws, for a statistics ladder, the reach below the zero
// against the statistics for every size (with the budget's prediction
// from the lowest rung, dashed) and against N for every rung (rung →
// lightness).
func (r *Results) ladderFigures() []report.Figure {
	st := r.Plan.Study
	if len(st.Sample.Sweeps) < 2 {
		return nil
	}
	var figs []report.Figure
	keys, byBeta := r.Plan.branchesByBeta()
	for _, key := range keys {
		beta, tag, suffix := key.beta, stages.F(key.beta), sectorsSuffix(key.sectors)
		if suffix != "" {
			tag += ", monomer sectors"
		}
		stat := report.Panel{Title: "reach below the zero against statistics, β=" + tag,
			XLabel: "log_{10}(sweeps per sector)", YLabel: "reach below the zero"}
		perRung := map[int][2][]float64{}
		for _, b := range byBeta[key] {
			rows, ok := r.costRows(b)
			if !ok {
				continue
			}
			c := sizeColor(st, b.Branch.L)
			var x, y []float64
			for k, row := range rows {
				x = append(x, math.Log10(row.sweeps))
				y = append(y, row.reachBelow)
				v := perRung[k]
				v[0], v[1] = append(v[0], float64(b.N)), append(v[1], row.reachBelow)
				perRung[k] = v
			}
			stat.Series = append(stat.Series, report.Series{Label: fmt.Sprintf("L=%d", b.Branch.L), Kind: report.Line, X: x, Y: y, Color: c})
			if px, py := r.predictedReach(b, rows); len(px) > 0 {
				stat.Series = append(stat.Series, report.Series{Label: fmt.Sprintf("L=%d budget", b.Branch.L), Kind: report.Dashed, X: px, Y: py, Color: c})
			}
		}
		vsN := report.Panel{Title: "reach below the zero against N, β=" + tag, XLabel: "N (sites)", YLabel: "reach below the zero"}
		rungs := len(st.Sample.Sweeps)
		for k := 0; k < rungs; k++ {
			v := perRung[k]
			vsN.Series = append(vsN.Series, report.Series{Label: fmt.Sprintf("%d sweeps", st.Sample.Sweeps[k]), Kind: report.Points,
				X: v[0], Y: v[1], Color: 6, Shade: 0.7 * float64(rungs-1-k) / float64(max(1, rungs-1)), Glyph: k + 1})
		}
		figs = append(figs, report.Figure{Name: "cost_statistics_beta" + stages.F(beta) + suffix, Panels: []report.Panel{stat}},
			report.Figure{Name: "cost_size_beta" + stages.F(beta) + suffix, Panels: []report.Panel{vsN}})
	}
	return figs
}

// predictedReach is the budget's prediction (probability ½, calibrated on
// the lowest rung) of the reach below the zero at each rung's statistics:
// the largest grid θ below the zero whose predicted sweeps do not exceed
// the rung's.
func (r *Results) predictedReach(b *BranchNodes, rows []costRow) (x, y []float64) {
	pilot := b
	if len(b.Rungs) > 0 {
		pilot = b.Rungs[0]
	}
	tr := r.Transform[pilot]
	if tr == nil {
		return nil, nil
	}
	zero := float64(tr.ExactFirstZero)
	if math.IsNaN(zero) && tr.FirstZero != nil {
		zero = tr.FirstZero.Value
	}
	curve := &transform.Curve{Theta: tr.Theta, Sign: stages.Floats(tr.Sign), SignErr: stages.Floats(tr.SignErr)}
	need := make([]float64, len(tr.Theta))
	for i, th := range tr.Theta {
		ex := math.NaN()
		if tr.HasExact {
			ex = float64(tr.SignExact[i])
		}
		p, err := transform.Budget(curve, transform.BudgetInput{N: b.N, Reach: float64(tr.Reach), Lo: float64(tr.ZeroBracket[0]),
			Hi: float64(tr.ZeroBracket[1]), Zero: zero, X: th, Sweeps: rows[0].sweeps, Factor: r.Plan.Study.Transform.ReachFactor,
			ExactSign: ex, Probability: 0.5})
		need[i] = math.Inf(1)
		if err == nil {
			need[i] = p.Sweeps
		}
	}
	for _, row := range rows {
		reach := math.NaN()
		for i, th := range tr.Theta {
			if need[i] > row.sweeps {
				break
			}
			reach = th
		}
		x, y = append(x, math.Log10(row.sweeps)), append(y, reach)
	}
	return x, y
}

// figureVersion salts the content hash of a figure: bump it when the
// drawing code changes what the same arrays look like.
const figureVersion = "figures v3 (column width, script labels, legend placement, pdf with fixed dates)"

// writeFigures renders every figure as PNG, SVG and PDF into
// outDir/figures and returns them with their SVG bytes for the report. A
// figure whose content hash (its arrays and labels, figureVersion) is the
// one recorded in figures/index.json and whose three files exist is not
// rendered again.
func (r *Results) writeFigures(outDir string) ([]report.Rendered, error) {
	var figs []report.Figure
	for _, b := range r.Plan.Branches {
		figs = append(figs, r.branchFigures(b, r.branchTables(b))...)
	}
	figs = append(figs, r.studyFigures()...)
	dir := filepath.Join(outDir, "figures")
	if err := os.MkdirAll(dir, 0o777); err != nil {
		return nil, err
	}
	indexPath := filepath.Join(dir, "index.json")
	prev := map[string]string{}
	if b, err := os.ReadFile(indexPath); err == nil {
		_ = json.Unmarshal(b, &prev) // a damaged index only costs a re-render
	}
	index := map[string]string{}
	var out []report.Rendered
	for i := range figs {
		f := &figs[i]
		var content bytes.Buffer // gob, unlike JSON, keeps NaN
		content.WriteString(figureVersion + "\n")
		if err := gob.NewEncoder(&content).Encode(f); err != nil {
			return nil, err
		}
		key := cache.Sum(content.Bytes()).String()
		index[f.Name] = key
		for _, ext := range []string{"svg", "png", "pdf"} {
			r.record(filepath.Join(dir, f.Name+"."+ext))
		}
		svgPath := filepath.Join(dir, f.Name+".svg")
		if prev[f.Name] == key && exists(filepath.Join(dir, f.Name+".png")) && exists(filepath.Join(dir, f.Name+".pdf")) {
			if svg, err := os.ReadFile(svgPath); err == nil {
				out = append(out, report.Rendered{Name: f.Name, SVG: svg})
				continue
			}
		}
		var svg []byte
		for _, format := range []string{"svg", "png", "pdf"} {
			b, err := f.Render(format)
			if err != nil {
				return nil, err
			}
			if err := writeIfChanged(filepath.Join(dir, f.Name+"."+format), b); err != nil {
				return nil, err
			}
			if format == "svg" {
				svg = b
			}
		}
		out = append(out, report.Rendered{Name: f.Name, SVG: svg})
	}
	b, err := json.MarshalIndent(index, "", "  ")
	if err != nil {
		return nil, err
	}
	return out, r.writeFile(indexPath, b)
}

func exists(path string) bool {
	_, err := os.Stat(path)
	return err == nil
}

// nf formats a nullable float, "—" for NaN.
func nf(x stages.NullableFloat, format string) string {
	if math.IsNaN(float64(x)) {
		return "—"
	}
	return fmt.Sprintf(format, float64(x))
}

// writeReport writes figures and report.html.
func (r *Results) writeReport(outDir string, man Manifest, studyText string) (string, error) {
	figs, err := r.writeFigures(outDir)
	if err != nil {
		return "", err
	}
	s := r.BuildSummary()
	p := report.Page{Name: s.Name, Tool: man.Tool, Version: man.Version, StudyHash: man.StudyHash.String(),
		StudyText: studyText, Dimension: s.Dimension, Figures: figs}
	dash := func(x *float64, f string) string {
		if x == nil {
			return "—"
		}
		return fmt.Sprintf(f, *x)
	}
	for _, b := range s.Branches {
		row := report.BranchRow{Dir: b.Dir, Size: fmt.Sprint(b.Size), Beta: stages.F(b.Beta), FirstZero: "not resolved",
			Exact: dash(b.ExactFirstZero, "%.6g"), Reach: dash(b.Reach, "%.4g")}
		if b.FirstZero != nil {
			row.FirstZero = fmt.Sprintf("%.6g ± %.2g", b.FirstZero.Value, b.FirstZero.Error)
			if b.FirstZero.Marginal {
				row.FirstZero += " (marginal: not in the scaling fit)"
			}
		}
		if b.ReachIsLowerBound {
			row.Reach = "≥ " + row.Reach
		}
		p.Branches = append(p.Branches, row)
	}
	for _, sc := range s.Scaling {
		row := report.ScalingRow{Beta: stages.F(sc.Beta), ThetaC: "—", Exponent: "—", Chi2: dash(sc.Chi2Dof, "%.3g"),
			Sizes: fmt.Sprint(sc.Sizes), Exact: dash(sc.ExactThetaC, "%.6g"), Note: sc.Note}
		if sc.ThetaC != nil {
			row.ThetaC = fmt.Sprintf("%.6g ± %.2g", sc.ThetaC.Value, sc.ThetaC.Error)
			row.Exponent = fmt.Sprintf("%.4g ± %.2g", sc.Exponent.Value, sc.Exponent.Error)
		}
		p.Scaling = append(p.Scaling, row)
	}
	for _, b := range s.Branches {
		for _, rr := range b.Routes {
			row := report.RouteRow{Dir: b.Dir, Route: rr.Route, FirstZero: "none", Exact: dash(b.ExactFirstZero, "%.6g"),
				Order: "—", Truncation: nf(rr.Truncation, "%.2g"),
				BiasOnset: nf(rr.BiasOnset, "%.4g") + ", " + nf(rr.BiasOnsetExact, "%.4g")}
			if rr.FirstZero != nil {
				row.FirstZero = nf(rr.FirstZero.Value, "%.6g")
				if !math.IsNaN(float64(rr.FirstZero.Error)) {
					row.FirstZero += " ± " + nf(rr.FirstZero.Error, "%.2g")
				}
			}
			if rr.Order > 0 {
				row.Order = fmt.Sprint(rr.Order)
			}
			p.Routes = append(p.Routes, row)
		}
	}
	for _, row := range comparisonRows(s.Comparison) {
		p.Comparison = append(p.Comparison, report.ComparisonRow{Size: row[0], Beta: row[1], Theta: row[2], Sectors: row[3],
			FirstZero: row[4], Reach: row[5], CPU: row[6], SignErr: row[7], SigmaSqrtCPU: row[8]})
	}
	for _, n := range man.Nodes {
		p.Nodes = append(p.Nodes, report.NodeRow{Stage: n.Stage, Branch: n.Branch, Label: n.Label, Key: n.Key.Short(), Status: n.Status})
	}
	html, err := report.HTML(p)
	if err != nil {
		return "", err
	}
	path := filepath.Join(outDir, "report.html")
	return path, r.writeFile(path, html)
}
