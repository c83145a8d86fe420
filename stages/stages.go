// Package stages adapts the physics packages below it to the pipeline.
//
// A Task is one unit of cached work: a stage name, the stage's code
// version, the canonical parameters it reads, and a function from its
// inputs' bytes to its output bytes. Tasks know nothing of TOML or of the
// cache; the pipeline hashes (stage, version, params, input keys) into a
// key and stores the output under it.
//
// Any change to a stage's code that can change its output must bump the
// stage's version constant below.
package stages

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"

	"codeberg.org/sbinet/npyio"
	"gonum.org/v1/gonum/mat"

	"strata/stages/lattice"
	"strata/stages/links"
	"strata/stages/ratio"
	"strata/stages/sampler"
)

// Stage names, as they appear in manifests.
const (
	SampleStage = "sample"
	RatiosStage = "ratios"
	StitchStage = "stitch"
	ExactStage  = "exact"
	// ExactDensityStage is ρ_β(M) by the floating-point transfer matrix,
	// cached per (d, L, β).
	ExactDensityStage = "exact_density"
	TransformStage    = "transform"
	ScalingStage      = "scaling"
	FitStage          = "fit"
	RoutesStage       = "routes"
	// ExactMonomerStage is the exact monomer density D_β(n).
	ExactMonomerStage = "exact_monomer"
)

// Code versions: bump when a stage's output for the same inputs changes.
const (
	sampleVersion = 1
	// monomerSampleVersion versions the link chain (its moves and sweep).
	monomerSampleVersion = 3 // 2: 64 lanes for insertion; 3: and for indicator
	ratiosVersion        = 2
	stitchVersion        = 2
	exactVersion         = 3
	exactDensityVersion  = 1
	transformVersion     = 6
	scalingVersion       = 4
	fitVersion           = 2
	routesVersion        = 1
	exactMonomerVersion  = 1
)

// Param is one canonical parameter: a name and its value as text (floats
// in strconv 'g' −1 form, so equal values give equal text).
type Param struct{ Name, Value string }

// Task is one node's computation.
type Task struct {
	Stage   string
	Version int
	Params  []Param
	// Run maps the inputs' outputs (in the order the pipeline wired them)
	// to this task's output.
	Run func(inputs [][]byte) ([]byte, error)
	// Lazy, when set, computes the same output fetching input i only when
	// it needs it (the pipeline then streams inputs from the cache instead
	// of holding them all); Run must agree with it.
	Lazy func(get func(i int) ([]byte, error)) ([]byte, error)
}

// lazyTask fills Run from Lazy for callers that hold the inputs.
func lazyTask(t Task) Task {
	t.Run = func(inputs [][]byte) ([]byte, error) {
		return t.Lazy(func(i int) ([]byte, error) {
			if i < 0 || i >= len(inputs) {
				return nil, fmt.Errorf("input %d of %d", i, len(inputs))
			}
			return inputs[i], nil
		})
	}
	return t
}

// F formats a float canonically.
func F(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// I formats an integer.
func I(x int) string { return strconv.Itoa(x) }

// SampleParams identify one shard: chunk Chunk of the chain labelled M (a
// magnetization, or with Sectors = Monomer a number of monomers n).
type SampleParams struct {
	D, L      int
	Beta      float64
	Estimator string // picks the chain (ratio.ChainOf; monomer: fixed-n or two-sector)
	Sectors   string // "" or Magnetization, or Monomer
	M, Chunk  int
	// Sweeps and Therm count sweeps of the 64-lane word for magnetization
	// chains (each lane makes that many), of the single chain for monomer
	// chains.
	Sweeps, Therm int
	// Block is the sweeps summed into one stored row (magnetization).
	Block int
	Seed  uint64 // derived by the pipeline from the study seed and the identity above
}

// Columns returns the number of measurement columns an estimator reads per
// row (after ratio.Cook for magnetization shards; monomer shards store
// them): insertion 2, bennett 2·(2d+1), indicator 1.
func Columns(estimator string, d int) int {
	switch estimator {
	case ratio.Insertion:
		return 2
	case ratio.Bennett:
		return 2 * sampler.HistWidth(d)
	}
	return 1
}

// Sample returns the task that runs one shard. Magnetization shards store
// the compact lane-summed block counts of their chain (ratio.RawColumns)
// as a uint32 .npy array of shape (sweeps/block, columns); the key depends
// on the chain, not on the estimator, so insertion and bennett share
// shards. Monomer shards store the per-sweep measurement series as a
// float64 .npy array of shape (sweeps, columns).
func Sample(p SampleParams) Task {
	if p.Sectors == Monomer {
		return Task{
			Stage: SampleStage, Version: monomerSampleVersion,
			Params: []Param{
				{"beta", F(p.Beta)}, {"chunk", I(p.Chunk)}, {"dimension", I(p.D)},
				{"estimator", p.Estimator}, {"lanes", I(links.Lanes)}, {"monomers", I(p.M)}, {"sectors", Monomer}, {"seed", strconv.FormatUint(p.Seed, 10)},
				{"size", I(p.L)}, {"sweeps", I(p.Sweeps)}, {"thermalization", I(p.Therm)},
			},
			Run: func([][]byte) ([]byte, error) { return monomerSample(p) },
		}
	}
	chain := ratio.ChainOf(p.Estimator)
	return Task{
		Stage: SampleStage, Version: sampleVersion,
		Params: []Param{
			{"beta", F(p.Beta)}, {"block_sweeps", I(p.Block)}, {"chain", chain}, {"chunk", I(p.Chunk)}, {"dimension", I(p.D)},
			{"lanes", I(sampler.Lanes)}, {"magnetization", I(p.M)}, {"seed", strconv.FormatUint(p.Seed, 10)},
			{"size", I(p.L)}, {"sweeps", I(p.Sweeps)}, {"thermalization", I(p.Therm)},
		},
		Run: func([][]byte) ([]byte, error) {
			lat, err := lattice.New(p.D, p.L)
			if err != nil {
				return nil, err
			}
			c := sampler.Chain{Lat: lat, Beta: p.Beta, M: p.M, Therm: p.Therm, Sweeps: p.Sweeps, Seed: p.Seed}
			var raw []uint32
			if chain == ratio.ChainPair {
				raw, err = sampler.PairLanes(c, p.Block)
			} else {
				raw, err = sampler.SectorLanes(c, p.Block)
			}
			if err != nil {
				return nil, err
			}
			return EncodeCounts(raw, ratio.RawColumns(chain, p.D))
		},
	}
}

// EncodeNpy writes a row-major rows×cols float64 array as .npy bytes.
func EncodeNpy(data []float64, rows, cols int) ([]byte, error) {
	var buf bytes.Buffer
	if err := npyio.Write(&buf, mat.NewDense(rows, cols, data)); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}

// DecodeNpy reads a 2-D float64 .npy array, returning it row-major.
func DecodeNpy(b []byte) (data []float64, rows, cols int, err error) {
	var m mat.Dense
	if err := npyio.Read(bytes.NewReader(b), &m); err != nil {
		return nil, 0, 0, fmt.Errorf("reading samples: %w", err)
	}
	rows, cols = m.Dims()
	data = make([]float64, 0, rows*cols)
	for i := 0; i < rows; i++ {
		data = append(data, m.RawRowView(i)...)
	}
	return data, rows, cols, nil
}

func encode(v any) ([]byte, error) { return json.Marshal(v) }

func decode(b []byte, v any) error {
	if err := json.Unmarshal(b, v); err != nil {
		return fmt.Errorf("decoding stage input: %w", err)
	}
	return nil
}

// NullableFloat marshals NaN and ±Inf as JSON null.
type NullableFloat float64

// MarshalJSON implements json.Marshaler.
func (f NullableFloat) MarshalJSON() ([]byte, error) {
	x := float64(f)
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return []byte("null"), nil
	}
	return []byte(F(x)), nil
}

// UnmarshalJSON implements json.Unmarshaler (null is NaN).
func (f *NullableFloat) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*f = NullableFloat(math.NaN())
		return nil
	}
	x, err := strconv.ParseFloat(string(b), 64)
	*f = NullableFloat(x)
	return err
}

func nullable(x []float64) []NullableFloat {
	out := make([]NullableFloat, len(x))
	for i, v := range x {
		out[i] = NullableFloat(v)
	}
	return out
}

// Floats converts back.
func Floats(x []NullableFloat) []float64 {
	out := make([]float64, len(x))
	for i, v := range x {
		out[i] = float64(v)
	}
	return out
}
