package stages

import (
	"fmt"
	"math"

	"strata/stages/dos"
	"strata/stages/polyfit"
	"strata/stages/transform"
)

// FitDegree is one fitted degree of the smoothing ansatz.
type FitDegree struct {
	Degree  int
	Chi2Dof NullableFloat
	AIC     float64
	LnRho   []float64 // the smoothed ln ρ, index (M+N)/2
}

// FitOut is the fit stage's output.
type FitOut struct {
	Target  string
	Degrees []FitDegree
	Notes   []string `json:",omitempty"`
}

// Fit returns the task smoothing a branch's stitched density of states
// with polynomials of the given degrees (package polyfit); inputs[0] is the
// stitch output.
func Fit(target string, degrees []int) Task {
	ds := ""
	for i, d := range degrees {
		if i > 0 {
			ds += ","
		}
		ds += I(d)
	}
	return Task{
		Stage: FitStage, Version: fitVersion,
		Params: []Param{{"degrees", ds}, {"target", target}},
		Run: func(inputs [][]byte) ([]byte, error) {
			var s StitchOut
			if err := decode(inputs[0], &s); err != nil {
				return nil, err
			}
			out := FitOut{Target: target}
			n := float64(s.N)
			for _, deg := range degrees {
				var x, y, sig []float64
				var res polyfit.Result
				var err error
				switch target {
				case polyfit.LnRho:
					for k := s.N / 2; k <= s.N; k++ { // M ≥ 0
						x = append(x, float64(2*k-s.N)/n)
						y = append(y, s.LnRho[k])
						sig = append(sig, s.LnRhoErr[k])
					}
					res, err = polyfit.Fit(x, y, sig, polyfit.Powers(target, deg))
				case polyfit.LnRatio:
					for i, m := range s.M {
						if m > 1 {
							x = append(x, float64(m-1)/n)
							y = append(y, s.LnRatio[i])
							sig = append(sig, s.LnRatioErr[i])
						}
					}
					res, err = polyfit.Fit(x, y, sig, polyfit.Powers(target, deg))
				default:
					err = fmt.Errorf("unknown fit target %q", target)
				}
				if len(polyfit.Powers(target, deg)) > len(x) {
					out.Notes = append(out.Notes, fmt.Sprintf("degree %d has more parameters than the %d points; skipped", deg, len(x)))
					continue
				}
				if err != nil {
					return nil, fmt.Errorf("degree %d: %w", deg, err)
				}
				fd := FitDegree{Degree: deg, AIC: res.AIC, Chi2Dof: NullableFloat(math.NaN())}
				if res.Dof > 0 {
					fd.Chi2Dof = NullableFloat(res.Chi2 / float64(res.Dof))
				}
				if target == polyfit.LnRho {
					fd.LnRho = make([]float64, s.N+1)
					for k := s.N / 2; k <= s.N; k++ {
						fd.LnRho[k] = res.Fitted[k-s.N/2]
						fd.LnRho[s.N-k] = res.Fitted[k-s.N/2]
					}
				} else {
					lnr := append([]float64(nil), res.Fitted...)
					if s.N%2 == 1 {
						lnr = append(lnr, 0) // ρ(1) = ρ(−1)
					}
					fd.LnRho = dos.Stitch(s.D, s.N, s.Beta, lnr)
				}
				out.Degrees = append(out.Degrees, fd)
			}
			return encode(out)
		},
	}
}

// FitCurve is the transform of one smoothed ln ρ.
type FitCurve struct {
	Degree    int
	Chi2Dof   NullableFloat
	AIC       float64
	Sign, ImM []NullableFloat
	FirstZero NullableFloat
	// BiasOnset is the first θ where the smoothed Im m leaves the raw one
	// by more than 2σ of the raw Im m (NaN if it never does on the grid).
	BiasOnset NullableFloat
}

func fitCurves(f *FitOut, tab *transform.Table, raw *transform.Curve, n int) []FitCurve {
	var out []FitCurve
	for _, d := range f.Degrees {
		v := tab.Eval(d.LnRho)
		fc := FitCurve{Degree: d.Degree, Chi2Dof: d.Chi2Dof, AIC: d.AIC, Sign: nullable(v.Sign), ImM: nullable(v.ImM),
			BiasOnset: NullableFloat(math.NaN())}
		for i := range raw.Theta {
			if raw.ImMErr[i] > 0 && math.Abs(v.ImM[i]-raw.ImM[i]) > 2*raw.ImMErr[i] {
				fc.BiasOnset = NullableFloat(raw.Theta[i])
				break
			}
		}
		fc.FirstZero = NullableFloat(transform.FirstRoot(n, d.LnRho, raw.Theta, v.Sign))
		out = append(out, fc)
	}
	return out
}
