package stages

import (
	"fmt"
	"math"

	"strata/stages/analysis"
	"strata/stages/routes"
)

// Route names (fixed: studies, checks and baselines refer to them).
const (
	RouteDirect  = "direct"
	RoutePhase2  = "phase2"  // wrapped phase, cumulants to order 2
	RoutePhase4  = "phase4"  // wrapped phase, to order 4
	RouteSeries2 = "series2" // unwrapped phase θM, to order 2
	RouteSeries4 = "series4" // unwrapped, to order 4
)

// PhaseRoutes lists the phase-expansion routes in output order.
var PhaseRoutes = []string{RoutePhase2, RoutePhase4, RouteSeries2, RouteSeries4}

// CumulantRoute names the real-field cumulant route at field h.
func CumulantRoute(h float64) string { return "cumulants_h" + F(h) }

// FitRoute names the smoothing fit of degree k.
func FitRoute(k int) string { return fmt.Sprintf("fit%d", k) }

// RoutesParams configure the routes stage.
type RoutesParams struct {
	MaxOrder int
	Fields   []float64 // real fields h = βH
	HasExact bool      // inputs[2] is the exact reference
}

// CumulantRow is one (h, order) row of cumulants.csv. Theta1 is the
// leading-zero estimate whose highest cumulant order is Order (NaN on rows
// without one); Theta1Trunc is its change from the previous estimate.
type CumulantRow struct {
	H                    float64
	Order                int
	Kappa, KappaErr      NullableFloat
	Theta1, Theta1Err    NullableFloat
	Theta1Trunc          NullableFloat
	ReH                  NullableFloat // Re h₀ of the leading pair (0 by Lee–Yang)
	KappaExact, Theta1Ex NullableFloat
}

// RouteZero is a route's first zero; Error is NaN where the route has no
// replica error (fits).
type RouteZero struct {
	Value NullableFloat `json:"value"`
	Error NullableFloat `json:"error"`
}

// RouteResult is one route of one branch in summary.json.
type RouteResult struct {
	Route     string     `json:"route"`
	FirstZero *RouteZero `json:"first_zero"`
	// BiasOnset is the first θ where the route leaves the direct sum by
	// more than 2σ of the direct sum (as for the fits); for cumulant
	// routes, which give no curve, it is null.
	BiasOnset NullableFloat `json:"bias_onset"`
	// BiasOnsetExact is the same on exact data: relative difference > 1e−3.
	BiasOnsetExact NullableFloat `json:"bias_onset_exact"`
	// Cumulant routes: the order used, the truncation estimate (last
	// change of the sequence, reported apart from the replica error) and
	// Re h₀.
	Order      int           `json:"order,omitempty"`
	Truncation NullableFloat `json:"truncation"`
	ReH        NullableFloat `json:"re_h"`
	Note       string        `json:"note,omitempty"`
}

// PhaseCurve is one phase route on the θ grid.
type PhaseCurve struct {
	Route              string
	Sign, SignErr      []NullableFloat
	SignExact          []NullableFloat `json:",omitempty"`
	BiasOnset, OnsetEx NullableFloat
}

// RoutesOut is one branch's routes.
type RoutesOut struct {
	Theta     []float64
	Phase     []PhaseCurve
	Cumulants []CumulantRow
	Routes    []RouteResult
}

// Routes returns the task evaluating the other routes from ρ to the zeros
// on the stored density: inputs[0] the stitch output, inputs[1] the
// transform output (grid, direct and fitted zeros), inputs[2] the exact
// reference when p.HasExact.
func Routes(p RoutesParams) Task {
	params := []Param{{"max_order", I(p.MaxOrder)}, {"with_exact", fmt.Sprint(p.HasExact)}}
	for i, h := range p.Fields {
		params = append(params, Param{fmt.Sprintf("field%03d", i), F(h)})
	}
	return Task{
		Stage: RoutesStage, Version: routesVersion, Params: params,
		Run: func(inputs [][]byte) ([]byte, error) {
			var s StitchOut
			var tr TransformOut
			if err := decode(inputs[0], &s); err != nil {
				return nil, err
			}
			if err := decode(inputs[1], &tr); err != nil {
				return nil, err
			}
			var ex *ExactOut
			if p.HasExact {
				ex = new(ExactOut)
				if err := decode(inputs[2], ex); err != nil {
					return nil, err
				}
				if ex.LnRho == nil {
					ex = nil // no exact ρ(M) table (a very large ring)
				}
			}
			return encode(evalRoutes(p, &s, &tr, ex))
		},
	}
}

func evalRoutes(p RoutesParams, s *StitchOut, tr *TransformOut, ex *ExactOut) *RoutesOut {
	out := &RoutesOut{Theta: tr.Theta}
	nan := NullableFloat(math.NaN())
	// direct and fitted zeros come from the transform
	direct := RouteResult{Route: RouteDirect, BiasOnset: nan, BiasOnsetExact: nan, Truncation: nan, ReH: nan}
	if tr.FirstZero != nil {
		direct.FirstZero = &RouteZero{NullableFloat(tr.FirstZero.Value), NullableFloat(tr.FirstZero.Error)}
	}
	out.Routes = append(out.Routes, direct)
	for _, f := range tr.Fits {
		r := RouteResult{Route: FitRoute(f.Degree), BiasOnset: f.BiasOnset, BiasOnsetExact: nan, Truncation: nan, ReH: nan,
			Note: "bias onset on Im m"}
		if !math.IsNaN(float64(f.FirstZero)) {
			r.FirstZero = &RouteZero{f.FirstZero, nan}
		}
		out.Routes = append(out.Routes, r)
	}
	// real-field cumulants
	for _, h := range p.Fields {
		rows, res := cumulantRoute(p.MaxOrder, h, s, ex)
		out.Cumulants = append(out.Cumulants, rows...)
		out.Routes = append(out.Routes, res)
	}
	// phase expansions against the direct sum
	central := make([][]float64, 4)
	central[0], central[1], central[2], central[3] = routes.PhaseSigns(s.N, s.LnRho, tr.Theta)
	reps := make([][][]float64, 4) // [route][replica][θ]
	for _, rep := range s.Replicas {
		a, b, c, d := routes.PhaseSigns(s.N, rep, tr.Theta)
		for i, v := range [][]float64{a, b, c, d} {
			reps[i] = append(reps[i], v)
		}
	}
	var exactPhase [][]float64
	if ex != nil {
		exactPhase = make([][]float64, 4)
		exactPhase[0], exactPhase[1], exactPhase[2], exactPhase[3] = routes.PhaseSigns(s.N, ex.LnRho, tr.Theta)
	}
	col := make([]float64, len(s.Replicas))
	for i, name := range PhaseRoutes {
		pc := PhaseCurve{Route: name, Sign: nullable(central[i]), SignErr: make([]NullableFloat, len(tr.Theta)), BiasOnset: nan, OnsetEx: nan}
		for t := range tr.Theta {
			for r := range s.Replicas {
				col[r] = reps[i][r][t]
			}
			pc.SignErr[t] = NullableFloat(analysis.StdDev(col))
			if math.IsNaN(float64(pc.BiasOnset)) && math.Abs(central[i][t]-float64(tr.Sign[t])) > 2*float64(tr.SignErr[t]) {
				pc.BiasOnset = NullableFloat(tr.Theta[t])
			}
		}
		if ex != nil {
			pc.SignExact = nullable(exactPhase[i])
			for t := range tr.Theta {
				d := float64(tr.SignExact[t])
				if !math.IsNaN(d) && math.Abs(exactPhase[i][t]-d) > 1e-3*math.Abs(d) {
					pc.OnsetEx = NullableFloat(tr.Theta[t])
					break
				}
			}
		}
		out.Phase = append(out.Phase, pc)
		out.Routes = append(out.Routes, RouteResult{Route: name, BiasOnset: pc.BiasOnset, BiasOnsetExact: pc.OnsetEx,
			Truncation: nan, ReH: nan, Note: "a truncated cumulant expansion is positive: it has no zero"})
	}
	return out
}

// cumulantRoute evaluates the cumulants at field h for the central
// density and every replica, with the leading-zero estimate at each order
// where one exists, and picks the reported order: the first at which the
// replica error exceeds the change from the previous estimate (beyond it
// noise grows faster than the sequence converges), else the last.
func cumulantRoute(maxOrder int, h float64, s *StitchOut, ex *ExactOut) ([]CumulantRow, RouteResult) {
	nan := NullableFloat(math.NaN())
	k := routes.Cumulants(s.N, s.LnRho, h, maxOrder)
	kr := make([][]float64, len(s.Replicas))
	for r, rep := range s.Replicas {
		kr[r] = routes.Cumulants(s.N, rep, h, maxOrder)
	}
	var ke []float64
	if ex != nil {
		ke = routes.Cumulants(s.N, ex.LnRho, h, maxOrder)
	}
	// estimate with highest order `order`: H0Sequence at h = 0 (even
	// orders ≥ 4), the four-cumulant pair otherwise (orders ≥ 4)
	estimate := func(kappa []float64, order int) (theta, reH float64) {
		if order < 4 {
			return math.NaN(), math.NaN()
		}
		if h == 0 {
			if order%2 != 0 {
				return math.NaN(), math.NaN()
			}
			seq := routes.H0Sequence(kappa[:order+1])
			return seq[len(seq)-1], 0
		}
		re, th, _ := routes.LeadingPair(kappa, order-3, h)
		return th, re
	}
	rows := make([]CumulantRow, 0, maxOrder)
	col := make([]float64, len(kr))
	res := RouteResult{Route: CumulantRoute(h), BiasOnset: nan, BiasOnsetExact: nan, Truncation: nan, ReH: nan}
	prev := math.NaN()
	chosen := -1
	for order := 1; order <= maxOrder; order++ {
		row := CumulantRow{H: h, Order: order, Kappa: NullableFloat(k[order]), KappaExact: nan,
			Theta1: nan, Theta1Err: nan, Theta1Trunc: nan, ReH: nan, Theta1Ex: nan}
		for r := range kr {
			col[r] = kr[r][order]
		}
		row.KappaErr = NullableFloat(analysis.StdDev(col))
		if ke != nil {
			row.KappaExact = NullableFloat(ke[order])
		}
		th, re := estimate(k, order)
		if order >= 4 && !math.IsNaN(th) {
			var finite []float64
			for r := range kr {
				if v, _ := estimate(kr[r], order); !math.IsNaN(v) {
					finite = append(finite, v)
				}
			}
			row.Theta1, row.ReH = NullableFloat(th), NullableFloat(re)
			if 2*len(finite) >= len(kr) {
				row.Theta1Err = NullableFloat(analysis.StdDev(finite))
			}
			if !math.IsNaN(prev) {
				row.Theta1Trunc = NullableFloat(math.Abs(th - prev))
			}
			if ke != nil {
				v, _ := estimate(ke, order)
				row.Theta1Ex = NullableFloat(v)
			}
			if chosen < 0 || rows[chosen].Theta1Err < rows[chosen].Theta1Trunc || math.IsNaN(float64(rows[chosen].Theta1Trunc)) {
				chosen = len(rows)
			}
			prev = th
		}
		rows = append(rows, row)
	}
	if chosen >= 0 {
		c := rows[chosen]
		res.FirstZero = &RouteZero{c.Theta1, c.Theta1Err}
		res.Order, res.Truncation, res.ReH = c.Order, c.Theta1Trunc, c.ReH
	} else {
		res.Note = "no leading-zero estimate (the cumulants admit no complex pair)"
	}
	return rows, res
}
