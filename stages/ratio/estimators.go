package ratio

import (
	"fmt"
	"math"
)

// InsertionColumns converts one sweep's local-field histograms (up spins
// then down spins, bin b ↔ h = 2b − 2d) of a chain at magnetization M into
// the two insertion measurements
//
//	A = Σ_{i: s_i=+1} e^{−2β h_i} / ((N−M+2)/2),  ⟨A⟩_M = ρ(M−2)/ρ(M),
//	B = Σ_{i: s_i=−1} e^{+2β h_i} / ((N+M+2)/2),  ⟨B⟩_M = ρ(M+2)/ρ(M).
//
// Derivation: the pairs (s, i) with s in sector M and s_i = +1 map one to
// one, by flipping spin i, onto the pairs (s', i) with s' in sector M−2 and
// s'_i = −1, and S(s') = S(s) − 2h_i(s). Summing e^{βS(s')} over those pairs
// gives ρ(M−2)·(N−M+2)/2 (sector M−2 has (N−M+2)/2 down spins), which is
// ρ(M)·⟨Σ_{i up} e^{−2βh_i}⟩_M. The identity for B is the same count
// read from below. A sector with no up (down) spins has A = 0 (B = 0).
func InsertionColumns(d, n, m int, beta float64, hist []float64, out []float64) {
	w := 2*d + 1
	var a, b float64
	for k := 0; k < w; k++ {
		h := float64(2*k - 2*d)
		if hist[k] != 0 {
			a += hist[k] * math.Exp(-2*beta*h)
		}
		if hist[w+k] != 0 {
			b += hist[w+k] * math.Exp(2*beta*h)
		}
	}
	out[0] = a / float64((n-m+2)/2)
	out[1] = b / float64((n+m+2)/2)
}

// Insertion combines, for each pair (M, M−2), the estimate from above
// (column A of chain M: −ln⟨A⟩_M) and from below (column B of chain M−2:
// ln⟨B⟩_{M−2}) with inverse-variance weights fixed at their central values.
// A direction with zero variance (the top two sectors, where the
// measurement is constant) is exact and is used alone.
func (in *Input) Insertion() (*Result, error) {
	if in.Cols != 2 {
		return nil, fmt.Errorf("ratio: insertion needs 2 columns, have %d", in.Cols)
	}
	r := &Result{}
	// varA[m], varB[m]: (block, variable) of ln<A> and ln<B> of chain m
	type ref struct{ block, v int }
	varA, varB := map[int]ref{}, map[int]ref{}
	for _, m := range Sectors(Insertion, in.N) {
		ch, err := in.chunks(m)
		if err != nil {
			return nil, err
		}
		var names []string
		var series [][][]float64
		bi := len(r.Blocks)
		if m > 0 {
			varA[m] = ref{bi, len(names)}
			names = append(names, fmt.Sprintf("ln<A>(M=%d)", m))
			series = append(series, column(ch, 2, 0))
		}
		if m+2 <= in.N {
			varB[m] = ref{bi, len(names)}
			names = append(names, fmt.Sprintf("ln<B>(M=%d)", m))
			series = append(series, column(ch, 2, 1))
		}
		b, err := in.logBlock(m, names, series)
		if err != nil {
			return nil, err
		}
		in.warnTau(r, b, ch)
		r.Blocks = append(r.Blocks, b)
	}
	for _, m := range pairs(in.N) {
		ba, va := varA[m].block, varA[m].v
		bb, vb := varB[m-2].block, varB[m-2].v
		A, B := r.Blocks[ba], r.Blocks[bb]
		sa, sb := A.Cov[va][va], B.Cov[vb][vb]
		w := 1.0
		if sa > 0 && sb > 0 {
			w = sb / (sa + sb)
		} else if sa > 0 {
			w = 0
		}
		q := Ratio{M: m, LnR: -w*A.Values[va] + (1-w)*B.Values[vb]}
		if w > 0 {
			q.Terms = append(q.Terms, Term{ba, va, -w})
		}
		if w < 1 {
			q.Terms = append(q.Terms, Term{bb, vb, 1 - w})
		}
		r.Ratios = append(r.Ratios, q)
	}
	in.appendOddMiddle(r)
	r.finish()
	return r, nil
}

// fermi is f(x) = 1/(1+e^x).
func fermi(x float64) float64 {
	if x > 0 {
		e := math.Exp(-x)
		return e / (1 + e)
	}
	return 1 / (1 + math.Exp(x))
}

// Bennett applies Bennett's acceptance-ratio estimator (C. H. Bennett,
// J. Comput. Phys. 22, 245 (1976), eq. 12 with the optimal constant) to the
// two fixed-sector chains of each pair. Ensemble 0 is (s in M, an up spin
// i), ensemble 1 is (s' in M−2, a down spin i); flipping i maps one onto
// the other with reduced energy change W = 2βh_i. With Z0 = ρ(M)(N+M)/2 and
// Z1 = ρ(M−2)(N−M+2)/2,
//
//	Z1/Z0 = e^{−C} ⟨f(W − C)⟩_0 / ⟨f(C − W')⟩_1,  f(x) = 1/(1+e^x),
//
// W' = 2βh of the down spin in ensemble 1, and C is iterated to its
// optimum C = ln(Z0/Z1) + ln(n1/n0). Columns are the raw histograms.
func (in *Input) Bennett() (*Result, error) {
	w := 2*in.D + 1
	if in.Cols != 2*w {
		return nil, fmt.Errorf("ratio: bennett needs %d histogram columns, have %d", 2*w, in.Cols)
	}
	n := in.N
	// mean histograms per chain, for solving C
	meanHist := map[int][]float64{}
	count := map[int]int{}
	for _, m := range Sectors(Bennett, n) {
		ch, err := in.chunks(m)
		if err != nil {
			return nil, err
		}
		acc := make([]float64, 2*w)
		t := 0
		for _, c := range ch {
			for i := 0; i+2*w <= len(c); i += 2 * w {
				for k := 0; k < 2*w; k++ {
					acc[k] += c[i+k]
				}
				t++
			}
		}
		for k := range acc {
			acc[k] /= float64(t)
		}
		meanHist[m], count[m] = acc, t
	}
	field := func(k int) float64 { return float64(2*k - 2*in.D) }
	// per-sweep values of the Fermi averages
	fwd := func(hist []float64, m int, c float64) float64 { // chain m, up spins
		s := 0.0
		for k := 0; k < w; k++ {
			if hist[k] != 0 {
				s += hist[k] * fermi(2*in.Beta*field(k)-c)
			}
		}
		return s / float64((n+m)/2)
	}
	bwd := func(hist []float64, m int, c float64) float64 { // chain m, down spins
		s := 0.0
		for k := 0; k < w; k++ {
			if hist[w+k] != 0 {
				s += hist[w+k] * fermi(c-2*in.Beta*field(k))
			}
		}
		return s / float64((n-m)/2)
	}
	cs := map[int]float64{}
	for _, m := range pairs(n) {
		n0, n1 := float64(count[m]), float64(count[m-2])
		c := 0.0
		for it := 0; it < 200; it++ {
			z1z0 := math.Exp(-c) * fwd(meanHist[m], m, c) / bwd(meanHist[m-2], m-2, c)
			next := -math.Log(z1z0) + math.Log(n1/n0)
			if math.IsNaN(next) || math.IsInf(next, 0) {
				return nil, fmt.Errorf("sector pair M=%d: Bennett's equation has no solution (no overlap)", m)
			}
			done := math.Abs(next-c) < 1e-13*math.Max(1, math.Abs(c))
			c = next
			if done {
				break
			}
		}
		cs[m] = c
	}
	r := &Result{}
	idx := map[int]int{}
	for _, m := range Sectors(Bennett, n) {
		ch, err := in.chunks(m)
		if err != nil {
			return nil, err
		}
		var names []string
		var series [][][]float64
		perSweep := func(f func([]float64) float64) [][]float64 {
			out := make([][]float64, len(ch))
			for k, c := range ch {
				o := make([]float64, len(c)/(2*w))
				for t := range o {
					o[t] = f(c[t*2*w : (t+1)*2*w])
				}
				out[k] = o
			}
			return out
		}
		if m > 1 {
			c := cs[m]
			names = append(names, fmt.Sprintf("ln<f0>(M=%d)", m))
			series = append(series, perSweep(func(h []float64) float64 { return fwd(h, m, c) }))
		}
		if m+2 <= n && (m > 0 || n%2 == 0) {
			c := cs[m+2]
			names = append(names, fmt.Sprintf("ln<f1>(M=%d)", m))
			series = append(series, perSweep(func(h []float64) float64 { return bwd(h, m, c) }))
		}
		b, err := in.logBlock(m, names, series)
		if err != nil {
			return nil, err
		}
		in.warnTau(r, b, ch)
		idx[m] = len(r.Blocks)
		r.Blocks = append(r.Blocks, b)
	}
	for _, m := range pairs(n) {
		b0, b1 := idx[m], idx[m-2]
		v0 := 0 // ln<f0> is the first variable of chain m
		v1 := len(r.Blocks[b1].Names) - 1
		// ln r = ln(ρ(M)/ρ(M−2)) = ln(n_down(M−2)/n_up(M)) + ln(Z0/Z1)
		lnr := math.Log(float64((n-m+2)/2)/float64((n+m)/2)) + cs[m] +
			r.Blocks[b1].Values[v1] - r.Blocks[b0].Values[v0]
		r.Ratios = append(r.Ratios, Ratio{M: m, LnR: lnr, Terms: []Term{{b1, v1, 1}, {b0, v0, -1}}})
	}
	in.appendOddMiddle(r)
	r.finish()
	return r, nil
}

// Indicator estimates each ratio from a chain restricted to {M, M−2}: with
// x̄ the mean fraction of time in M, ln r = ln x̄ − ln(1 − x̄), its error
// from the Γ-method on the projected series x/x̄ + x/(1 − x̄).
func (in *Input) Indicator() (*Result, error) {
	if in.Cols != 1 {
		return nil, fmt.Errorf("ratio: indicator needs 1 column, have %d", in.Cols)
	}
	r := &Result{}
	for _, m := range pairs(in.N) {
		q, err := in.indicatorPair(r, m)
		if err != nil {
			return nil, err
		}
		r.Ratios = append(r.Ratios, q)
	}
	in.appendOddMiddle(r)
	r.finish()
	return r, nil
}

// indicatorPair analyses the two-sector chain labelled m (its upper
// sector), appending its block to r.
func (in *Input) indicatorPair(r *Result, m int) (Ratio, error) {
	ch, err := in.chunks(m)
	if err != nil {
		return Ratio{}, err
	}
	g := meanOf(ch)
	if !(g > 0 && g < 1) {
		return Ratio{}, fmt.Errorf("sector pair %s: the chain stayed in one sector (fraction %v); raise sample.sweeps", in.label(m), g)
	}
	b, err := in.projectedBlock(m, fmt.Sprintf("ln r(%s)", in.label(m)), math.Log(g/(1-g)), scale(ch, 1/g+1/(1-g)))
	if err != nil {
		return Ratio{}, err
	}
	in.warnTau(r, b, ch)
	r.Blocks = append(r.Blocks, b)
	return Ratio{M: m, LnR: b.Values[0], Terms: []Term{{len(r.Blocks) - 1, 0, 1}}}, nil
}

func meanOf(reps [][]float64) float64 {
	s, n := 0.0, 0
	for _, r := range reps {
		for _, x := range r {
			s += x
		}
		n += len(r)
	}
	return s / float64(n)
}

func (in *Input) projectedBlock(m int, name string, value float64, proj [][]float64) (Block, error) {
	g := analysisGamma(proj)
	if err := in.checkTau(m, name, g); err != nil {
		return Block{}, err
	}
	return Block{Sector: m, Names: []string{name}, Values: []float64{value},
		Cov: [][]float64{{g.Err * g.Err}}, Tau: []float64{g.Tau}}, nil
}
