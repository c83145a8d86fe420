package stages

import (
	"fmt"
	"math"
	"sort"
	"strata/stages/analysis"

	"strata/stages/exact"
	"strata/stages/fss"
	"strata/stages/rng"
)

// ScalingParams configure the finite-size scaling of one β.
type ScalingParams struct {
	Dimension  int
	Beta       float64
	Sizes      []int   // of the inputs, in order
	Exponent   float64 // fixed y; NaN for a free fit
	Correction bool
	MinSize    int
	Replicas   int
	Seed       uint64
	Sectors    string // Monomer, or "" for magnetization
}

// ScalingOut is one β's scaling result (summary.json → scaling).
type ScalingOut struct {
	Beta float64 `json:"beta"`
	// Sectors is the representation whose zeros were fitted; filled in
	// by the pipeline for summary.json.
	Sectors        string         `json:"sectors"`
	ThetaC         *ValErr        `json:"theta_c"`
	Exponent       *ValErr        `json:"exponent"`
	Amplitude      *ValErr        `json:"amplitude"`
	Chi2Dof        *float64       `json:"chi2_dof"`
	Sizes          []int          `json:"sizes"`
	ExactThetaC    *float64       `json:"exact_theta_c"`
	ExactFitThetaC *float64       `json:"exact_fit_theta_c"`
	Note           string         `json:"note,omitempty"`
	Points         []ScalingPoint `json:"points"`
}

// ScalingPoint is one size's first zero.
type ScalingPoint struct {
	L           int      `json:"L"`
	Theta1      *float64 `json:"theta1"`
	Theta1Err   *float64 `json:"theta1_err"`
	Theta1Exact *float64 `json:"theta1_exact"`
	Marginal    bool     `json:"marginal,omitempty"` // left out of the fit
}

func fptr(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}

// Scaling returns the task fitting θ₁(L) = θ_c + a L^{−y} over the
// transforms of one β (inputs in the order of p.Sizes). Errors come from
// refitting replicas: replica j takes the j-th replica root of every size
// (sizes are independent chains, so their replicas combine freely); when a
// size has fewer than 2 replica roots, R parametric replicas are drawn
// instead (each θ₁ from a normal with its error).
func Scaling(p ScalingParams) Task {
	exp := "free"
	if !math.IsNaN(p.Exponent) {
		exp = F(p.Exponent)
	}
	params := []Param{{"beta", F(p.Beta)}, {"correction", fmt.Sprint(p.Correction)}, {"dimension", I(p.Dimension)},
		{"exponent", exp}, {"min_size", I(p.MinSize)}, {"replicas", I(p.Replicas)}, {"seed", fmt.Sprint(p.Seed)}}
	if p.Sectors == Monomer {
		params = append(params, Param{"sectors", Monomer})
	}
	return Task{
		Stage: ScalingStage, Version: scalingVersion,
		Params: params,
		Run: func(inputs [][]byte) ([]byte, error) {
			out := ScalingOut{Beta: p.Beta, Sizes: []int{}, Points: []ScalingPoint{}}
			var pts, exactPts []fss.Point
			var roots [][]float64
			for i, b := range inputs {
				var t TransformOut
				if err := decode(b, &t); err != nil {
					return nil, err
				}
				sp := ScalingPoint{L: p.Sizes[i], Theta1Exact: fptr(float64(t.ExactFirstZero))}
				if t.FirstZero != nil {
					sp.Theta1, sp.Theta1Err = fptr(t.FirstZero.Value), fptr(t.FirstZero.Error)
				}
				sp.Marginal = t.ZeroMarginal
				out.Points = append(out.Points, sp)
				if t.FirstZero == nil || t.ZeroMarginal || p.Sizes[i] < p.MinSize || !(t.FirstZero.Error > 0) {
					continue // marginal zeros are kept out of the fit
				}
				pts = append(pts, fss.Point{L: p.Sizes[i], Theta: t.FirstZero.Value, Err: t.FirstZero.Error})
				roots = append(roots, t.ZeroRoots)
				if ez := float64(t.ExactFirstZero); !math.IsNaN(ez) {
					exactPts = append(exactPts, fss.Point{L: p.Sizes[i], Theta: ez, Err: t.FirstZero.Error})
				}
			}
			order := make([]int, len(pts))
			for i := range order {
				order[i] = i
			}
			sort.Slice(order, func(a, b int) bool { return pts[order[a]].L < pts[order[b]].L })
			sortedPts := make([]fss.Point, len(pts))
			sortedRoots := make([][]float64, len(pts))
			for i, k := range order {
				sortedPts[i], sortedRoots[i] = pts[k], roots[k]
			}
			pts, roots = sortedPts, sortedRoots
			for _, q := range pts {
				out.Sizes = append(out.Sizes, q.L)
			}
			if p.Dimension == 1 {
				out.ExactThetaC = fptr(exact.RingEdge(p.Beta))
			}
			free := math.IsNaN(p.Exponent)
			y0 := p.Exponent
			if free {
				y0 = 2
			}
			fit, err := fss.Solve(pts, y0, free, p.Correction)
			if err != nil {
				out.Note = fmt.Sprintf("%d resolved sizes ≥ min_size; the fit needs %d", len(pts), fss.Params(free, p.Correction)+1)
				return encode(out)
			}
			if len(exactPts) == len(pts) {
				if ef, err := fss.Solve(exactPts, y0, free, p.Correction); err == nil {
					out.ExactFitThetaC = fptr(ef.ThetaC)
				}
			}
			gen := rng.NewRand(p.Seed)
			var tc, ys, as []float64
			rep := make([]fss.Point, len(pts))
			nrep := p.Replicas
			for _, r := range roots {
				nrep = min(nrep, len(r))
			}
			parametric := nrep < 2
			if parametric {
				nrep = p.Replicas
			}
			for r := 0; r < nrep; r++ {
				for i, q := range pts {
					th := q.Theta + q.Err*gen.Norm()
					if !parametric {
						th = roots[i][r]
					}
					rep[i] = fss.Point{L: q.L, Theta: th, Err: q.Err}
				}
				if f, err := fss.Solve(rep, fit.Y, free, p.Correction); err == nil {
					tc, ys, as = append(tc, f.ThetaC), append(ys, f.Y), append(as, f.A)
				}
			}
			out.ThetaC = &ValErr{fit.ThetaC, analysis.StdDev(tc)}
			out.Exponent = &ValErr{fit.Y, analysis.StdDev(ys)}
			out.Amplitude = &ValErr{fit.A, analysis.StdDev(as)}
			if fit.Dof > 0 {
				out.Chi2Dof = fptr(fit.Chi2 / float64(fit.Dof))
			}
			return encode(out)
		},
	}
}
