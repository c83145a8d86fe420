package ratio

import (
	"errors"
	"fmt"
	"math"
)

// MonomerSectors returns the chain labels of the monomer representation
// for N sites: the fixed-n chains n = 0, 2, …, ≤ N (insertion), or the
// upper sectors n = 2, 4, …, ≤ N of the two-sector chains {n−2, n}
// (indicator).
func MonomerSectors(estimator string, n int) []int {
	low := 0
	if estimator == Indicator {
		low = 2
	}
	var out []int
	for m := low; m <= n; m += 2 {
		out = append(out, m)
	}
	return out
}

// MonomerInsertion estimates ln[D(n)/D(n−2)] for n = 2, 4, …, ≤ N from the
// fixed-n link chains by the two-sided identity
//
//	D(n)/D(n−2) = ⟨A⟩_{n−2} / ⟨B⟩_n,
//
// A = Σ_{bonds with both ends even} t^{1−2k_b} (column 0), B = #{bonds with
// both ends odd} (column 1), averages in the fixed-n ensembles (identity
// checked by enumeration; see package links). Both sides are needed, so
// the estimate is ln⟨A⟩_{n−2} − ln⟨B⟩_n with the covariance of the two
// independent chains. Every sector whose series cannot be analysed (a
// mean of zero, or too few measurements per τ_int: rare events near
// n = N and, at low temperature, near n = 2) is reported in one error.
func (in *Input) MonomerInsertion() (*Result, error) {
	if in.Cols != 2 {
		return nil, fmt.Errorf("ratio: monomer insertion needs 2 columns, have %d", in.Cols)
	}
	r := &Result{}
	type ref struct{ block, v int }
	varA, varB := map[int]ref{}, map[int]ref{}
	var errs []error
	for _, m := range MonomerSectors(Insertion, in.N) {
		ch, err := in.chunks(m)
		if err != nil {
			return nil, err
		}
		var names []string
		var series [][][]float64
		bi := len(r.Blocks)
		if m+2 <= in.N {
			varA[m] = ref{bi, len(names)}
			names = append(names, fmt.Sprintf("ln<A>(n=%d)", m))
			series = append(series, column(ch, 2, 0))
		}
		if m >= 2 {
			varB[m] = ref{bi, len(names)}
			names = append(names, fmt.Sprintf("ln<B>(n=%d)", m))
			series = append(series, column(ch, 2, 1))
		}
		b, err := in.logBlock(m, names, series)
		if err != nil {
			errs = append(errs, err) // every sector's reason, then one error
			continue
		}
		in.warnTau(r, b, ch)
		r.Blocks = append(r.Blocks, b)
	}
	if len(errs) > 0 {
		return nil, fmt.Errorf("%d monomer sector(s) could not be analysed: %w", len(errs), errors.Join(errs...))
	}
	for m := 2; m <= in.N; m += 2 {
		a, b := varA[m-2], varB[m]
		lnr := r.Blocks[a.block].Values[a.v] - r.Blocks[b.block].Values[b.v]
		if math.IsNaN(lnr) || math.IsInf(lnr, 0) {
			return nil, fmt.Errorf("sector pair n=%d: ln D(n)/D(n−2) = %v", m, lnr)
		}
		r.Ratios = append(r.Ratios, Ratio{M: m, LnR: lnr, Terms: []Term{{a.block, a.v, 1}, {b.block, b.v, -1}}})
	}
	r.finish()
	return r, nil
}

// MonomerIndicator estimates ln[D(n)/D(n−2)] from a chain restricted to the
// two sectors {n−2, n} (labelled n, column 0 the fraction of time in n):
// ln r = ln x̄ − ln(1 − x̄), as for magnetization sectors.
func (in *Input) MonomerIndicator() (*Result, error) {
	if in.Cols != 1 {
		return nil, fmt.Errorf("ratio: indicator needs 1 column, have %d", in.Cols)
	}
	r := &Result{}
	var errs []error
	for _, m := range MonomerSectors(Indicator, in.N) {
		q, err := in.indicatorPair(r, m)
		if err != nil {
			errs = append(errs, err)
			continue
		}
		r.Ratios = append(r.Ratios, q)
	}
	if len(errs) > 0 {
		return nil, fmt.Errorf("%d monomer sector pair(s) could not be analysed: %w", len(errs), errors.Join(errs...))
	}
	r.finish()
	return r, nil
}
