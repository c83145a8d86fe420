package pipeline

import (
	"fmt"
	"math"

	"strata/pipeline/report"
	"strata/stages"
)

// Comparison sets the two representations of one (L, β) side by side
// (summary.json → comparison).
type Comparison struct {
	Size int     `json:"size"`
	Beta float64 `json:"beta"`
	// Theta is the common θ where the sign's errors are compared: the
	// smaller of the two reaches (null when either has none).
	Theta         *float64       `json:"theta"`
	Magnetization ComparisonSide `json:"magnetization"`
	Monomer       ComparisonSide `json:"monomer"`
}

// ComparisonSide is one representation's entry of a comparison.
type ComparisonSide struct {
	Dir       string         `json:"dir"`
	FirstZero *stages.ValErr `json:"first_zero"`
	Reach     *float64       `json:"reach"`
	// CPUSeconds sums the sample shards' thread CPU time (provenance).
	CPUSeconds *float64 `json:"cpu_seconds"`
	// SignErr is σ of the sign at Theta; SigmaSignSqrtCPU is
	// σ·√cpu_seconds, the statistics-independent cost measure (lower
	// wins: the CPU time to a given error scales as its square).
	SignErr          *float64 `json:"sign_err"`
	SigmaSignSqrtCPU *float64 `json:"sigma_sign_sqrt_cpu"`
}

// pairs returns the (magnetization, monomer) branches of each (L, β) that
// has both, in branch order.
func (r *Results) pairs() [][2]*BranchNodes {
	var out [][2]*BranchNodes
	for _, a := range r.Plan.Branches {
		if a.Branch.Monomer() {
			continue
		}
		for _, b := range r.Plan.Branches {
			if b.Branch.Monomer() && b.Branch.L == a.Branch.L && b.Branch.Beta == a.Branch.Beta {
				out = append(out, [2]*BranchNodes{a, b})
			}
		}
	}
	return out
}

// comparisons builds the comparison list of summary.json.
func (r *Results) comparisons() []Comparison {
	var out []Comparison
	for _, pr := range r.pairs() {
		c := Comparison{Size: pr[0].Branch.L, Beta: pr[0].Branch.Beta}
		sides := [2]*ComparisonSide{&c.Magnetization, &c.Monomer}
		theta := math.Inf(1)
		for i, b := range pr {
			s := sides[i]
			s.Dir = b.Branch.Dir()
			if cpu, ok := r.CPU[b]; ok {
				s.CPUSeconds = ptr(cpu)
			}
			tr := r.Transform[b]
			if tr == nil {
				theta = math.NaN()
				continue
			}
			if tr.FirstZero != nil {
				z := *tr.FirstZero
				s.FirstZero = &z
			}
			s.Reach = ptr(float64(tr.Reach))
			theta = math.Min(theta, float64(tr.Reach)) // NaN stays NaN
			if math.IsNaN(float64(tr.Reach)) {
				theta = math.NaN()
			}
		}
		if !math.IsNaN(theta) && !math.IsInf(theta, 0) {
			c.Theta = ptr(theta)
			for i, b := range pr {
				tr := r.Transform[b]
				k := gridIndex(tr.Theta, theta)
				if k < 0 {
					continue
				}
				e := float64(tr.SignErr[k])
				sides[i].SignErr = ptr(e)
				if sides[i].CPUSeconds != nil {
					sides[i].SigmaSignSqrtCPU = ptr(e * math.Sqrt(*sides[i].CPUSeconds))
				}
			}
		}
		out = append(out, c)
	}
	return out
}

// comparisonFigures draws, per (L, β) sampled in both representations,
// |sign| and σ_sign·√cpu_seconds against θ (representation → marker
// shape: circles for magnetization, squares for monomer sectors).
func (r *Results) comparisonFigures() []report.Figure {
	st := r.Plan.Study
	var figs []report.Figure
	for _, pr := range r.pairs() {
		a, b := pr[0], pr[1]
		ta, tb := r.Transform[a], r.Transform[b]
		if ta == nil || tb == nil {
			continue
		}
		c := sizeColor(st, a.Branch.L)
		tag := fmt.Sprintf("L=%d, β=%s", a.Branch.L, stages.F(a.Branch.Beta))
		sign := report.Panel{Title: "average sign by representation, " + tag, XLabel: thetaLabel, YLabel: "|sign(θ)|", LogY: true}
		cost := report.Panel{XLabel: thetaLabel, YLabel: "σ_{sign}·√(CPU s)", LogY: true,
			XMin: ta.Theta[0], XMax: ta.Theta[len(ta.Theta)-1]}
		sign.XMin, sign.XMax = cost.XMin, cost.XMax
		for i, bn := range pr {
			tr := r.Transform[bn]
			name := "magnetization sectors"
			if i == 1 {
				name = "monomer sectors"
			}
			sign.Series = append(sign.Series, report.Series{Label: name, Kind: report.Points, X: tr.Theta,
				Y: abs(stages.Floats(tr.Sign)), Err: stages.Floats(tr.SignErr), Color: c, Glyph: i + 1})
			if cpu, ok := r.CPU[bn]; ok && cpu > 0 {
				y := stages.Floats(tr.SignErr)
				for k := range y {
					y[k] *= math.Sqrt(cpu)
					if tr.Theta[k] == 0 {
						y[k] = math.NaN() // σ = 0 up to rounding: sign(0) = 1 exactly
					}
				}
				cost.Series = append(cost.Series, report.Series{Label: name, Kind: report.Points, X: tr.Theta, Y: y, Color: c, Glyph: i + 1})
			}
		}
		if ex := ta.SignExact; ex != nil {
			sign.Series = append(sign.Series, report.Series{Label: "exact", Kind: report.Dashed, X: ta.Theta, Y: abs(stages.Floats(ex)), Color: 6, Exact: true})
		}
		f := report.Figure{Name: a.Branch.Dir() + "_comparison", Panels: []report.Panel{sign}}
		if len(cost.Series) > 0 {
			f.Panels = append(f.Panels, cost)
		}
		figs = append(figs, f)
	}
	return figs
}
