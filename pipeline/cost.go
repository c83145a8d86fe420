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
		// a reach at the grid's end is a lower bound, not a measurement
		if i := gridIndexOf(tr.Theta, row.reachBelow); i >= 0 && i < len(tr.Theta)-1 {
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

// replicaCost recomputes, for every rung (smallest first) and error
// replica, the reach below the zero from the replica's sign with the rung's
// σ (the transform's reach rule), and −ln|sign| there (exact where known).
func (r *Results) replicaCost(b *BranchNodes) (reach, negLog [][]float64, ok bool) {
	bs, _ := r.rungsOf(b)
	factor := r.Plan.Study.Transform.ReachFactor
	for _, rb := range bs {
		s, tr := r.Stitch[rb], r.Transform[rb]
		if s == nil || tr == nil {
			return nil, nil, false
		}
		c := transform.Evaluate(stages.SumFor(s.Sectors, s.N, tr.Theta), s.LnRho, s.Replicas)
		limit := math.Inf(1)
		if !math.IsNaN(float64(tr.ExactFirstZero)) {
			limit = float64(tr.ExactFirstZero)
		} else if tr.FirstZero != nil {
			limit = tr.FirstZero.Value
		}
		var rr, rs []float64
		for _, sign := range c.ReplicaSign {
			rch, idx := math.NaN(), -1
			for i, th := range tr.Theta {
				if th >= limit || math.Abs(sign[i]) < factor*float64(tr.SignErr[i]) {
					break
				}
				rch, idx = th, i
			}
			v := math.NaN()
			if idx >= 0 && idx < len(tr.Theta)-1 {
				v = -math.Log(math.Abs(signAtOr(tr, idx, sign[idx])))
			}
			rr, rs = append(rr, rch), append(rs, v)
		}
		reach, negLog = append(reach, rr), append(negLog, rs)
	}
	return reach, negLog, true
}

// costSummary fits the slopes (rungs whose reach is cut by the grid's end
// are left out of the sign slope); each error is the standard deviation of the
// same fits on the error replicas (replicaCost).
func (r *Results) costSummary(b *BranchNodes) *CostSummary {
	rows, ok := r.costRows(b)
	if !ok {
		return nil
	}
	_, sw := r.rungsOf(b)
	lnS := make([]float64, len(sw))
	for i, s := range sw {
		lnS[i] = math.Log(s)
	}
	y1, y2 := make([]float64, len(rows)), make([]float64, len(rows))
	for i, row := range rows {
		y1[i], y2[i] = row.negLogSign, row.reachBelow*row.reachBelow
	}
	out := &CostSummary{Slope: stages.ValErr{Value: olsSlope(lnS, y1)}, ThetaSlope: stages.ValErr{Value: olsSlope(lnS, y2)}}
	reach, negLog, ok := r.replicaCost(b)
	if !ok {
		return out
	}
	var s1, s2 []float64
	for j := 0; j < minLen(reach); j++ {
		a, c := make([]float64, len(sw)), make([]float64, len(sw))
		for k := range sw {
			a[k], c[k] = negLog[k][j], reach[k][j]*reach[k][j]
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

func minLen(x [][]float64) int {
	n := -1
	for _, v := range x {
		if n < 0 || len(v) < n {
			n = len(v)
		}
	}
	return max(n, 0)
}

// CostFit is, for one β and one rung of a ladder, the fit
// −ln|sign(reach_below_zero)| = a + b ln N over the sizes (b with the
// standard deviation of the same fit over the error replicas).
type CostFit struct {
	Beta float64 `json:"beta"`
	// Sectors is the representation whose sizes were fitted.
	Sectors string        `json:"sectors"`
	Sweeps  int           `json:"sweeps"`
	B       stages.ValErr `json:"b"`
	Sizes   []int         `json:"sizes"`
}

// branchesByBeta groups the branches by β and representation, in plan
// order.
func (p *Plan) branchesByBeta() ([]scalingKey, map[scalingKey][]*BranchNodes) {
	byBeta := map[scalingKey][]*BranchNodes{}
	var keys []scalingKey
	for _, b := range p.Branches {
		k := scalingKey{b.Branch.Beta, b.Branch.Sectors}
		if byBeta[k] == nil {
			keys = append(keys, k)
		}
		byBeta[k] = append(byBeta[k], b)
	}
	return keys, byBeta
}

// costFits fits every (β, rung) of a ladder study over its sizes.
func (r *Results) costFits() []CostFit {
	st := r.Plan.Study
	if len(st.Sample.Sweeps) < 2 {
		return nil
	}
	var out []CostFit
	keys, byBeta := r.Plan.branchesByBeta()
	for _, key := range keys {
		beta, bs := key.beta, byBeta[key]
		if len(bs) < 2 {
			continue
		}
		var lnN []float64
		var sizes []int
		var rows [][]costRow
		var reps [][][]float64
		for _, b := range bs {
			rw, ok := r.costRows(b)
			_, nl, ok2 := r.replicaCost(b)
			if !ok || !ok2 {
				return out
			}
			lnN, sizes = append(lnN, math.Log(float64(b.N))), append(sizes, b.Branch.L)
			rows, reps = append(rows, rw), append(reps, nl)
		}
		for k, sw := range st.Sample.Sweeps {
			y := make([]float64, len(bs))
			for i := range bs {
				y[i] = rows[i][k].negLogSign
			}
			fit := CostFit{Beta: beta, Sectors: key.sectors, Sweeps: sw, Sizes: sizes, B: stages.ValErr{Value: olsSlope(lnN, y)}}
			var bsj []float64
			n := -1
			for i := range bs {
				if n < 0 || len(reps[i][k]) < n {
					n = len(reps[i][k])
				}
			}
			for j := 0; j < n; j++ {
				yj := make([]float64, len(bs))
				for i := range bs {
					yj[i] = reps[i][k][j]
				}
				if v := olsSlope(lnN, yj); !math.IsNaN(v) {
					bsj = append(bsj, v)
				}
			}
			fit.B.Error = analysis.StdDev(bsj)
			out = append(out, fit)
		}
	}
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
