package ratio

import (
	"fmt"
	"math"
)

// Chains of the magnetization sectors: the fixed-M chain serves insertion
// and Bennett (the same stored shards), the two-sector chain the
// indicator.
const (
	ChainSector = "sector"
	ChainPair   = "pair"
)

// ChainOf returns the chain an estimator reads.
func ChainOf(estimator string) string {
	if estimator == Indicator {
		return ChainPair
	}
	return ChainSector
}

// RawColumns returns the columns of a compact shard of the chain: 2·(2d+1)
// lane-summed local-field counts per block for the fixed-M chain (up spins
// with h = −2d, −2d+2, …, 2d, then down spins), 2 for the two-sector chain
// (lane-proposals ending in the upper sector, and all lane-proposals).
func RawColumns(chain string, d int) int {
	if chain == ChainPair {
		return 2
	}
	return 2 * (2*d + 1)
}

// Cook turns the rows (blocks) of one compact shard of chain M into the
// estimator's measurement rows, one per block:
//
//   - insertion: A = Σ_{up} e^{−2βh}/((N−M+2)/2) and B = Σ_{down}
//     e^{+2βh}/((N+M+2)/2), the block means per lane and sweep (see
//     InsertionColumns); the counts are normalized by their own sums
//     (Σ_h of the up counts is (N+M)/2 per lane and sweep), so the lanes
//     and the block length need not be known;
//   - bennett: the block-mean histograms per lane and sweep (2W columns);
//   - indicator: the fraction of lane-proposals in the upper sector.
//
// The exponentials are computed once per shard. Every quantity is linear
// in the counts, so block means are exact means of the per-sweep values.
func Cook(estimator string, d, n, m int, beta float64, raw []uint32) ([]float64, error) {
	cols := RawColumns(ChainOf(estimator), d)
	if len(raw)%cols != 0 {
		return nil, fmt.Errorf("ratio: %d counts are not whole rows of %d", len(raw), cols)
	}
	rows := len(raw) / cols
	switch estimator {
	case Indicator:
		out := make([]float64, rows)
		for i := range out {
			up, all := raw[2*i], raw[2*i+1]
			if all == 0 || up > all {
				return nil, fmt.Errorf("ratio: block %d counts %d of %d proposals in the upper sector", i, up, all)
			}
			out[i] = float64(up) / float64(all)
		}
		return out, nil
	case Insertion, Bennett:
	default:
		return nil, fmt.Errorf("ratio: unknown estimator %q", estimator)
	}
	w := 2*d + 1
	nu, nd := float64((n+m)/2), float64((n-m)/2)
	down, up := make([]float64, w), make([]float64, w)
	for k := 0; k < w; k++ {
		h := float64(2*k - 2*d)
		down[k], up[k] = math.Exp(-2*beta*h), math.Exp(2*beta*h)
	}
	outCols := 2
	if estimator == Bennett {
		outCols = 2 * w
	}
	out := make([]float64, rows*outCols)
	for i := 0; i < rows; i++ {
		row := raw[i*cols : (i+1)*cols]
		var su, sd, a, b float64
		for k := 0; k < w; k++ {
			hu, hd := float64(row[k]), float64(row[w+k])
			su += hu
			sd += hd
			a += hu * down[k]
			b += hd * up[k]
		}
		if (su == 0) != (nu == 0) || (sd == 0) != (nd == 0) {
			return nil, fmt.Errorf("ratio: block %d has %v up and %v down counts in sector M=%d", i, su, sd, m)
		}
		o := out[i*outCols : (i+1)*outCols]
		if estimator == Insertion {
			if su > 0 {
				o[0] = a / su * nu / float64((n-m+2)/2)
			}
			if sd > 0 {
				o[1] = b / sd * nd / float64((n+m+2)/2)
			}
			continue
		}
		for k := 0; k < w; k++ {
			if su > 0 {
				o[k] = float64(row[k]) / su * nu
			}
			if sd > 0 {
				o[w+k] = float64(row[w+k]) / sd * nd
			}
		}
	}
	return out, nil
}
