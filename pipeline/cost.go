package pipeline

import (
	"math"

	"strata/stages"
	"strata/stages/analysis"
	"strata/stages/transform"
)

// CostSummary is a ladder branch's measured cost of the sign problem: OLS
// slopes over the rungs of −ln|sign(reach_below_zero)| and of
// reach_below_zero² against ln(sweeps), with errors from repeating the fit
// on every error replica (bootstrap over replicas).
type CostSummary struct {
	Slope      stages.ValErr `json:"slope"`
	ThetaSlope stages.ValErr `json:"theta_slope"`
}

// costRow is one rung of cost.csv.
type costRow struct {
	sweeps, cpu, reach, reachBelow, negLogSign, refErr, zero, zeroErr float64
}

// rungsOf returns a ladder branch's rungs with their sweeps, smallest first
// (the branch itself is the top rung).
func (r *Results) rungsOf(b *BranchNodes) ([]*BranchNodes, []float64) {
	var bs []*BranchNodes
	var sw []float64
	for _, rb := range b.Rungs {
		bs, sw = append(bs, rb), append(sw, float64(rb.Rung))
	}
	bs = append(bs, b)
	sw = append(sw, float64(r.Plan.Study.Sample.Sweeps.Top()))
	return bs, sw
}

// signAt is the sign used for −ln|sign| at grid point i: exact where the
// branch has an exact reference, else measured.
func signAt(tr *stages.TransformOut, i int) float64 { return signAtOr(tr, i, float64(tr.Sign[i])) }

func gridIndexOf(theta []float64, x float64) int {
	for i, t := range theta {
		if t == x {
			return i
		}
	}
	return -1
}

// costRows evaluates every rung; ok is false until all rungs have results.
func (r *Results) costRows(b *BranchNodes) (rows []costRow, ok bool) {
	bs, sw := r.rungsOf(b)
	thetaRef := math.Inf(1)
	for _, rb := range bs {
		tr := r.Transform[rb]
		if tr == nil {
			return nil, false
		}
		thetaRef = math.Min(thetaRef, float64(tr.ReachBelowZero))
	}
	if v := r.Plan.Study.Cost.ThetaRef; v != nil {
		thetaRef = *v
	}
	for k, rb := range bs {
		tr := r.Transform[rb]
		row := costRow{sweeps: sw[k], cpu: math.NaN(), reach: float64(tr.Reach), reachBelow: float64(tr.ReachBelowZero),
			negLogSign: math.NaN(), zero: math.NaN(), zeroErr: math.NaN()}
		if cpu, ok := r.CPU[rb]; ok {
			row.cpu = cpu
		}
		if i := gridIndexOf(tr.Theta, row.reachBelow); i >= 0 {
			row.negLogSign = -math.Log(math.Abs(signAt(tr, i)))
		}
		row.refErr = interpolate(tr.Theta, stages.Floats(tr.SignErr), thetaRef)
		if tr.FirstZero != nil {
			row.zero, row.zeroErr = tr.FirstZero.Value, tr.FirstZero.Error
		}
		rows = append(rows, row)
	}
	return rows, true
}

func interpolate(x, y []float64, at float64) float64 {
	for i := 1; i < len(x); i++ {
		if at <= x[i] && at >= x[i-1] {
			f := (at - x[i-1]) / (x[i] - x[i-1])
			return (1-f)*y[i-1] + f*y[i]
		}
	}
	return math.NaN()
}

// costTable is cost.csv of a ladder branch.
func (r *Results) costTable(b *BranchNodes) *table {
	rows, ok := r.costRows(b)
	if !ok {
		return nil
	}
	t := &table{name: "cost.csv"}
	var cols [8][]float64
	for _, row := range rows {
		for i, v := range []float64{row.sweeps, row.cpu, row.reach, row.reachBelow, row.negLogSign, row.refErr, row.zero, row.zeroErr} {
			cols[i] = append(cols[i], v)
		}
	}
	for i, name := range []string{"sweeps", "cpu_seconds", "reach", "reach_below_zero", "neg_log_sign", "theta_ref_sign_err", "first_zero", "first_zero_err"} {
		t.add(name, cols[i])
	}
	return t
}

// olsSlope is the least-squares slope of y against x (NaN with fewer
// than two finite points).
func olsSlope(x, y []float64) float64 {
	var n, sx, sy, sxx, sxy float64
	for i := range x {
		if math.IsNaN(y[i]) || math.IsInf(y[i], 0) {
			continue
		}
		n++
		sx += x[i]
		sy += y[i]
		sxx += x[i] * x[i]
		sxy += x[i] * y[i]
	}
	if n < 2 {
		return math.NaN()
	}
	return (n*sxy - sx*sy) / (n*sxx - sx*sx)
}

// costSummary fits the slopes; each error is the standard deviation of the
// same fits on the error replicas, whose reach is recomputed from each
// replica's sign with the rung's σ (the reach rule of the transform, capped
// below the zero).
func (r *Results) costSummary(b *BranchNodes) *CostSummary {
	rows, ok := r.costRows(b)
	if !ok {
		return nil
	}
	bs, sw := r.rungsOf(b)
	lnS := make([]float64, len(sw))
	for i, s := range sw {
		lnS[i] = math.Log(s)
	}
	y1, y2 := make([]float64, len(rows)), make([]float64, len(rows))
	for i, row := range rows {
		y1[i], y2[i] = row.negLogSign, row.reachBelow*row.reachBelow
	}
	out := &CostSummary{Slope: stages.ValErr{Value: olsSlope(lnS, y1)}, ThetaSlope: stages.ValErr{Value: olsSlope(lnS, y2)}}
	// per-replica reaches
	factor := r.Plan.Study.Transform.ReachFactor
	var reps [][]float64 // [rung][replica] reach below zero
	var repSigns [][]float64
	nrep := -1
	for _, rb := range bs {
		s, tr := r.Stitch[rb], r.Transform[rb]
		if s == nil || tr == nil {
			return out
		}
		c := transform.Evaluate(transform.NewTable(s.N, tr.Theta), s.LnRho, s.Replicas)
		limit := math.Inf(1)
		if !math.IsNaN(float64(tr.ExactFirstZero)) {
			limit = float64(tr.ExactFirstZero)
		} else if tr.FirstZero != nil {
			limit = tr.FirstZero.Value
		}
		var rr, rs []float64
		for _, sign := range c.ReplicaSign {
			reach, idx := math.NaN(), -1
			for i, th := range tr.Theta {
				if th >= limit || math.Abs(sign[i]) < factor*float64(tr.SignErr[i]) {
					break
				}
				reach, idx = th, i
			}
			rr = append(rr, reach)
			v := math.NaN()
			if idx >= 0 {
				v = -math.Log(math.Abs(signAtOr(tr, idx, sign[idx])))
			}
			rs = append(rs, v)
		}
		if nrep < 0 || len(rr) < nrep {
			nrep = len(rr)
		}
		reps, repSigns = append(reps, rr), append(repSigns, rs)
	}
	var s1, s2 []float64
	for j := 0; j < nrep; j++ {
		a, c := make([]float64, len(bs)), make([]float64, len(bs))
		for k := range bs {
			a[k], c[k] = repSigns[k][j], reps[k][j]*reps[k][j]
		}
		if v := olsSlope(lnS, a); !math.IsNaN(v) {
			s1 = append(s1, v)
		}
		if v := olsSlope(lnS, c); !math.IsNaN(v) {
			s2 = append(s2, v)
		}
	}
	out.Slope.Error = analysis.StdDev(s1)
	out.ThetaSlope.Error = analysis.StdDev(s2)
	return out
}

// signAtOr is the exact sign at grid point i where known, else the given
// (replica) value.
func signAtOr(tr *stages.TransformOut, i int, measured float64) float64 {
	if tr.HasExact && !math.IsNaN(float64(tr.SignExact[i])) {
		return float64(tr.SignExact[i])
	}
	return measured
}
