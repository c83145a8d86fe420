package stages

import (
	"fmt"

	"strata/stages/exact"
	"strata/stages/links"
	"strata/stages/ratio"
	"strata/stages/transform"
)

// Representations: which sectors a branch samples. Magnetization sectors
// M measure ρ_β(M); monomer sectors n (the high-temperature link
// representation) measure D_β(n).
const (
	Magnetization = "magnetization"
	Monomer       = "monomer"
)

// Representations lists the supported [sample] sectors.
var Representations = []string{Magnetization, Monomer}

// SectorsOf returns a branch's chain labels: magnetizations M or monomer
// numbers n.
func SectorsOf(sectors, estimator string, n int) []int {
	if sectors == Monomer {
		return ratio.MonomerSectors(estimator, n)
	}
	return ratio.Sectors(estimator, n)
}

// SumFor returns the representation's sum over sectors on a θ grid.
func SumFor(sectors string, n int, grid []float64) transform.Sum {
	if sectors == Monomer {
		return transform.NewDualTable(n, grid)
	}
	return transform.NewTable(n, grid)
}

// monomerSample runs one shard of the 64-lane link chain: insertion →
// fixed n, columns A, B averaged over the lanes per sweep; indicator → the
// two-sector chain {n−2, n}, column: the lanes' mean fraction of time in n.
func monomerSample(p SampleParams) ([]byte, error) {
	lt, err := links.NewLattice(p.D, p.L)
	if err != nil {
		return nil, err
	}
	c := links.Chain{Lat: lt, Beta: p.Beta, Monomers: p.M, Therm: p.Therm, Sweeps: p.Sweeps, Seed: p.Seed}
	var data []float64
	switch p.Estimator {
	case ratio.Insertion:
		data, err = c.RunLanes()
	case ratio.Indicator:
		c.TwoSector = true
		data, err = c.RunLanes()
	default:
		return nil, fmt.Errorf("estimator %q has no monomer chain (use %s or %s)", p.Estimator, ratio.Insertion, ratio.Indicator)
	}
	if err != nil {
		return nil, err
	}
	return EncodeNpy(data, p.Sweeps, Columns(p.Estimator, p.D))
}

// MonomerExactOut is the exact monomer density of one branch.
type MonomerExactOut struct {
	N    int
	Beta float64
	// LnD is ln D(n) − ln D(0) at index n/2.
	LnD []float64
	// Source says how: the ring's link transfer matrix or the Krawtchouk
	// transform of exact integer counts.
	Source string
}

// MaxMonomerRing bounds the ring's exact D (an O(N²) transfer matrix).
const MaxMonomerRing = MaxRingTable

// MonomerExactAvailable says whether exact D(n) exists for L^d: rings up to
// MaxMonomerRing sites, and wherever exact integer counts exist (2D
// L ≤ 8, 3D up to 27 sites) — never from a floating-point ρ, whose
// rounding the Krawtchouk transform amplifies by up to C(N, n).
func MonomerExactAvailable(d, l int) bool {
	switch d {
	case 1:
		return l >= 3 && l <= MaxMonomerRing
	case 2:
		return l <= exact.MaxTorusSize
	case 3:
		return l*l*l <= exact.MaxEnumerateSites
	}
	return false
}

// ExactMonomer returns the task computing exact ln D(n) of L^d at β; for
// d ≥ 2 inputs[0] is the output of ExactCountsTask.
func ExactMonomer(d, l int, beta float64, maxBits int) Task {
	return Task{
		Stage: ExactMonomerStage, Version: exactMonomerVersion,
		Params: []Param{{"beta", F(beta)}, {"dimension", I(d)}, {"max_bits", I(maxBits)}, {"size", I(l)}},
		Run: func(inputs [][]byte) ([]byte, error) {
			if !MonomerExactAvailable(d, l) {
				return nil, fmt.Errorf("no exact monomer density for %d^%d sites", l, d)
			}
			if d == 1 {
				lnD, err := exact.RingMonomerLnD(l, beta)
				if err != nil {
					return nil, err
				}
				return encode(MonomerExactOut{N: l, Beta: beta, LnD: lnD, Source: "ring link transfer matrix"})
			}
			if len(inputs) != 1 {
				return nil, fmt.Errorf("the exact monomer density of %d^%d needs the exact counts", l, d)
			}
			var c exact.Counts
			if err := decode(inputs[0], &c); err != nil {
				return nil, err
			}
			lnD, err := exact.MonomerLnD(c.Rho(beta), c.N, 1e-14, uint(maxBits))
			if err != nil {
				return nil, err
			}
			return encode(MonomerExactOut{N: c.N, Beta: beta, LnD: lnD, Source: "Krawtchouk transform of exact counts"})
		},
	}
}
