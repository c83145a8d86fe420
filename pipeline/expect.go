package pipeline

import (
	"fmt"
	"math"

	"strata/stages"
)

// Quantities an expectation may name.
var expectQuantities = map[string]bool{"first_zero": true, "reach": true, "sign": true, "im_m": true,
	"ln_rho": true, "ln_D": true, "theta_c": true, "exponent": true}

func (st *Study) validateExpect(p *Problems) {
	for i, e := range st.Expect {
		key := fmt.Sprintf("expect[%d]", i)
		if !expectQuantities[e.Quantity] {
			p.add(key+".quantity", "%q is not one of first_zero, reach, sign, im_m, ln_rho, ln_D, theta_c, exponent", e.Quantity)
		}
		if e.Sectors != "" && e.Sectors != stages.Magnetization && e.Sectors != stages.Monomer {
			p.add(key+".sectors", "%q is not one of %s, %s", e.Sectors, stages.Magnetization, stages.Monomer)
		}
		if (e.Value == nil) == !e.Exact {
			p.add(key, "give exactly one of value or exact = true")
		}
		if e.Sigma < 0 || e.Tolerance < 0 || (e.Sigma == 0 && e.Tolerance == 0) || math.IsNaN(e.Sigma+e.Tolerance) || math.IsInf(e.Sigma+e.Tolerance, 0) {
			p.add(key, "give a finite sigma > 0 or tolerance > 0")
		}
		for name, v := range map[string]*float64{"value": e.Value, "beta": e.Beta, "theta": e.Theta} {
			if v != nil && (math.IsNaN(*v) || math.IsInf(*v, 0)) {
				p.add(key+"."+name, "%v must be finite", *v)
			}
		}
	}
}
