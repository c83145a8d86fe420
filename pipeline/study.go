package pipeline

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"sort"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"github.com/BurntSushi/toml"

	"strata/cache"
	"strata/stages"
	"strata/stages/polyfit"
	"strata/stages/ratio"
)

// Study is one resolved study file. Every key except [model] has a default
// (see Defaults); key names are the public schema documented in README.md.
type Study struct {
	Name      string        `toml:"name" json:"name"`
	Model     ModelSpec     `toml:"model" json:"model"`
	Sample    SampleSpec    `toml:"sample" json:"sample"`
	Ratios    RatiosSpec    `toml:"ratios" json:"ratios"`
	Stitch    StitchSpec    `toml:"stitch" json:"stitch"`
	Exact     ExactSpec     `toml:"exact" json:"exact"`
	Transform TransformSpec `toml:"transform" json:"transform"`
	Scaling   ScalingSpec   `toml:"scaling" json:"scaling"`
	Fit       FitSpec       `toml:"fit" json:"fit"`
	Routes    RoutesSpec    `toml:"routes" json:"routes"`
	Cost      CostSpec      `toml:"cost" json:"cost"`
	Expect    []ExpectSpec  `toml:"expect" json:"expect,omitempty"`
}

// ModelSpec: periodic L^d lattice, inverse temperatures β (J = 1).
type ModelSpec struct {
	Dimension int       `toml:"dimension" json:"dimension"`
	Sizes     []int     `toml:"sizes" json:"sizes"`
	Betas     []float64 `toml:"betas" json:"betas"`
}

// SampleSpec configures the sector chains.
type SampleSpec struct {
	Sweeps         Sweeps `toml:"sweeps" json:"sweeps"`                 // measured sweeps per sector (rounded up to whole chunks); a list is a statistics ladder
	ChunkSweeps    int    `toml:"chunk_sweeps" json:"chunk_sweeps"`     // sweeps per independent chain (shard)
	Thermalization int    `toml:"thermalization" json:"thermalization"` // sweeps discarded per chunk
	Seed           int64  `toml:"seed" json:"seed"`
	Estimator      string `toml:"estimator" json:"estimator"`
	// Sectors lists the representations sampled for every (L, β):
	// "magnetization" (sectors of fixed M) and "monomer" (sectors of fixed
	// n in the link representation).
	Sectors []string `toml:"sectors" json:"sectors"`
	// BlockSweeps is the sweeps summed into one stored row of a
	// magnetization shard (default: the largest divisor of chunk_sweeps
	// not above 16 that leaves every chunk at least minBlocks rows).
	BlockSweeps int `toml:"block_sweeps" json:"block_sweeps"`
}

// minBlocks is the fewest rows per chunk the default block length leaves:
// with blocks nearly independent (τ_int ≈ 0.5–1.5 blocks, estimated with
// a noise of ≈ τ√(14/rows)) it keeps the Γ-method's guard (100 τ_int) from
// refusing sectors by chance in studies of hundreds of sectors. It depends
// on chunk_sweeps only, so that more sweeps reuse every stored chunk.
const minBlocks = 256

// defaultBlock returns the largest divisor of chunk not above 16 that
// leaves at least minBlocks blocks in it (1 when none does).
func defaultBlock(chunk int) int {
	for b := 16; b > 1; b-- {
		if chunk%b == 0 && chunk/b >= minBlocks {
			return b
		}
	}
	return 1
}

// Sweeps is [sample] sweeps: one number, or a strictly increasing list (a
// statistics ladder whose rungs share their first chunks).
type Sweeps []int

// UnmarshalTOML accepts an integer or an array of integers.
func (s *Sweeps) UnmarshalTOML(v any) error {
	switch x := v.(type) {
	case int64:
		*s = Sweeps{int(x)}
		return nil
	case []any:
		out := make(Sweeps, 0, len(x))
		for _, e := range x {
			n, ok := e.(int64)
			if !ok {
				return fmt.Errorf("must be an integer or a list of integers (got %v)", e)
			}
			out = append(out, int(n))
		}
		*s = out
		return nil
	}
	return fmt.Errorf("must be an integer or a list of integers (got %v)", v)
}

// MarshalJSON writes one rung as a number (the canonical form of a study
// without a ladder is unchanged), a ladder as an array.
func (s Sweeps) MarshalJSON() ([]byte, error) {
	if len(s) == 1 {
		return []byte(strconv.Itoa(s[0])), nil
	}
	return json.Marshal([]int(s))
}

// Top is the largest rung: the statistics every output but the ladder's
// lower rungs use.
func (s Sweeps) Top() int {
	if len(s) == 0 {
		return 0
	}
	return s[len(s)-1]
}

// RatiosSpec configures the error analysis of the ratios.
type RatiosSpec struct {
	MinTauRatio  float64 `toml:"min_tau_ratio" json:"min_tau_ratio"`   // refuse n < this·τ_int
	WarnTauRatio float64 `toml:"warn_tau_ratio" json:"warn_tau_ratio"` // warn n < this·τ_int
}

// StitchSpec configures the error replicas.
type StitchSpec struct {
	Replicas int `toml:"replicas" json:"replicas"`
}

// ExactSpec configures the exact references.
type ExactSpec struct {
	Enabled bool `toml:"enabled" json:"enabled"`
	MaxBits int  `toml:"max_bits" json:"max_bits"` // precision cap of the high-precision sum
	// MaxSites: no exact reference for d ≥ 2 lattices with more sites
	// (default by dimension: 144 in 2D, 64 in 3D, the transfer matrices'
	// whole range).
	MaxSites *int `toml:"max_sites" json:"max_sites"`
}

// exactKind is how the exact reference of a branch is computed ("" for none).
func (st *Study) exactKind(b Branch) string {
	if !st.Exact.Enabled {
		return ""
	}
	kind, _ := stages.ExactKind(st.Model.Dimension, b.L, b.Beta, *st.Exact.MaxSites)
	return kind
}

// TransformSpec is the θ grid (θ = Im h, h = βH dimensionless) and the
// rules for zeros and reach.
type TransformSpec struct {
	ThetaMin     float64 `toml:"theta_min" json:"theta_min"`
	ThetaMax     float64 `toml:"theta_max" json:"theta_max"`
	ThetaPoints  int     `toml:"theta_points" json:"theta_points"`
	ReachFactor  float64 `toml:"reach_factor" json:"reach_factor"`   // reach: |sign| ≥ this·σ
	ZeroFraction float64 `toml:"zero_fraction" json:"zero_fraction"` // replicas with one crossing needed
}

// ScalingSpec configures the finite-size scaling fit θ₁(L) = θ_c + a L^−y.
type ScalingSpec struct {
	Exponent   any  `toml:"exponent" json:"exponent"` // "free" or a number
	Correction bool `toml:"correction" json:"correction"`
	MinSize    int  `toml:"min_size" json:"min_size"`
}

// FitSpec configures the optional smoothing of ln ρ by polynomials.
type FitSpec struct {
	Enabled bool   `toml:"enabled" json:"enabled"`
	Target  string `toml:"target" json:"target"`   // "ln_rho" or "ln_ratio"
	Degrees []int  `toml:"degrees" json:"degrees"` // scanned in one run
}

// CostSpec configures the cost analysis of a statistics ladder.
type CostSpec struct {
	// ThetaRef is where cost.csv reports the sign's error per rung
	// (default: the smallest reach below the zero of the ladder).
	ThetaRef *float64 `toml:"theta_ref" json:"theta_ref,omitempty"`
}

// RoutesSpec configures the optional routes stage: real-field cumulants
// up to MaxOrder at each real field h = βH in Fields, and the phase
// cumulant expansions.
type RoutesSpec struct {
	Enabled  bool      `toml:"enabled" json:"enabled"`
	MaxOrder int       `toml:"max_order" json:"max_order"`
	Fields   []float64 `toml:"fields" json:"fields"`
}

// ExpectSpec is one physics regression expectation.
type ExpectSpec struct {
	Branch    string   `toml:"branch" json:"branch,omitempty"`
	Size      int      `toml:"size" json:"size,omitempty"`
	Beta      *float64 `toml:"beta" json:"beta,omitempty"`
	Quantity  string   `toml:"quantity" json:"quantity"`
	Value     *float64 `toml:"value" json:"value,omitempty"`
	Exact     bool     `toml:"exact" json:"exact,omitempty"`
	Sigma     float64  `toml:"sigma" json:"sigma,omitempty"`
	Tolerance float64  `toml:"tolerance" json:"tolerance,omitempty"`
	Theta     *float64 `toml:"theta" json:"theta,omitempty"`
	M         *int     `toml:"M" json:"M,omitempty"`
	// Sectors picks the representation of a branch named by size and
	// beta, and of theta_c and exponent (default "magnetization").
	Sectors string `toml:"sectors" json:"sectors,omitempty"`
	// N is the number of monomers of quantity ln_D.
	N *int `toml:"n" json:"n,omitempty"`
}

// sectors returns the expectation's representation.
func (e ExpectSpec) sectors() string {
	if e.Sectors == "" {
		return stages.Magnetization
	}
	return e.Sectors
}

// Defaults returns a study with every default filled in.
func Defaults() Study {
	return Study{
		Name: "study",
		Sample: SampleSpec{Sweeps: Sweeps{4096}, ChunkSweeps: 4096, Thermalization: 100,
			Seed: 1, Estimator: ratio.Insertion, Sectors: []string{stages.Magnetization}},
		Ratios:    RatiosSpec{MinTauRatio: 100, WarnTauRatio: 1000},
		Stitch:    StitchSpec{Replicas: 200},
		Exact:     ExactSpec{Enabled: true, MaxBits: 1 << 14},
		Transform: TransformSpec{ThetaMin: 0, ThetaMax: 0.5, ThetaPoints: 101, ReachFactor: 2, ZeroFraction: 0.95},
		Scaling:   ScalingSpec{Exponent: "free"},
		Fit:       FitSpec{Target: "ln_rho", Degrees: []int{2, 4, 6, 8}},
		Routes:    RoutesSpec{MaxOrder: 20, Fields: []float64{0, 0.1, 0.2}},
	}
}

// Problems collects every problem found in a study file.
type Problems struct {
	File string
	List []string
}

func (p *Problems) add(key, format string, args ...any) {
	msg := fmt.Sprintf(format, args...)
	if key != "" {
		msg = key + ": " + msg
	}
	p.List = append(p.List, msg)
}

func (p *Problems) Error() string {
	var b strings.Builder
	for i, m := range p.List {
		if i > 0 {
			b.WriteByte('\n')
		}
		fmt.Fprintf(&b, "%s: %s", p.File, m)
	}
	return b.String()
}

// LoadStudy reads a study file, applies --set overrides (dotted.key=value,
// the value in TOML syntax; a bare word is a string) and validates. All
// problems are reported at once in a *Problems error.
func LoadStudy(path string, sets []string) (*Study, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, &Problems{File: path, List: []string{err.Error()}}
	}
	return ParseStudy(path, data, sets)
}

// ParseStudy is LoadStudy on bytes already read; path names them in errors.
func ParseStudy(path string, data []byte, sets []string) (*Study, error) {
	st := Defaults()
	probs := &Problems{File: path}
	md, err := decodeAll(string(data), &st, probs)
	if err != nil {
		var pe toml.ParseError
		if errors.As(err, &pe) {
			probs.add("", "line %d: %s", pe.Position.Line, pe.Message)
		} else {
			probs.add("", "%v", err)
		}
		return nil, probs
	}
	if !md.IsDefined("model") {
		probs.add("model", "the [model] table is required")
	}
	if len(probs.List) > 0 {
		return nil, probs // type errors make the values below meaningless
	}
	for _, s := range sets {
		if err := applySet(&st, s); err != nil {
			probs.add("--set "+s, "%v", err)
		}
	}
	st.validate(probs)
	if len(probs.List) > 0 {
		return nil, probs
	}
	return &st, nil
}

// ParseSet splits "dotted.key=value" into its table path, key and a TOML
// document that sets it. A value that is not valid TOML is taken as a
// string.
func ParseSet(s string) (doc string, err error) {
	eq := strings.IndexByte(s, '=')
	if eq <= 0 {
		return "", fmt.Errorf("want dotted.key=value")
	}
	key, val := strings.TrimSpace(s[:eq]), strings.TrimSpace(s[eq+1:])
	parts := strings.Split(key, ".")
	for _, p := range parts {
		if !bareKey.MatchString(p) {
			return "", fmt.Errorf("malformed key %q (want dotted.key=value)", key)
		}
	}
	var probe map[string]any
	if _, err := toml.Decode("v = "+val, &probe); err != nil || strings.ContainsAny(val, "\n\r") {
		val = strconv.Quote(val)
		if _, err := toml.Decode("v = "+val, &probe); err != nil {
			return "", fmt.Errorf("value %q is not valid", s[eq+1:])
		}
	}
	last := parts[len(parts)-1]
	if len(parts) == 1 {
		return last + " = " + val + "\n", nil
	}
	return "[" + strings.Join(parts[:len(parts)-1], ".") + "]\n" + last + " = " + val + "\n", nil
}

// bareKey matches a TOML bare key.
var bareKey = regexp.MustCompile(`^[A-Za-z0-9_-]+$`)

func applySet(st *Study, s string) error {
	doc, err := ParseSet(s)
	if err != nil {
		return err
	}
	md, err := toml.Decode(doc, st)
	if err != nil {
		return err
	}
	if u := md.Undecoded(); len(u) > 0 {
		return fmt.Errorf("unknown key %s", u[0])
	}
	return nil
}

func (st *Study) validate(p *Problems) {
	if st.Name == "" || strings.ContainsAny(st.Name, `/\`) || strings.Contains(st.Name, "..") || st.Name == "." {
		p.add("name", "%q must be a plain folder name (no path separators, no \"..\")", st.Name)
	} else if len(st.Name) > maxNameLen || strings.IndexFunc(st.Name, unicode.IsControl) >= 0 || !utf8.ValidString(st.Name) {
		p.add("name", "%q must be valid text of at most %d bytes without control characters", st.Name, maxNameLen)
	}
	m := st.Model
	if m.Dimension < 1 || m.Dimension > 3 {
		p.add("model.dimension", "%d must be 1, 2 or 3", m.Dimension)
	}
	if len(m.Sizes) == 0 {
		p.add("model.sizes", "at least one linear size L is required")
	}
	seen := map[int]bool{}
	for _, l := range m.Sizes {
		if l < 2 {
			p.add("model.sizes", "L = %d: sizes must be ≥ 2", l)
		} else if m.Dimension >= 1 && m.Dimension <= 3 && math.Pow(float64(l), float64(m.Dimension)) > 1<<24 {
			p.add("model.sizes", "L = %d: %d^%d sites is beyond what this tool samples", l, l, m.Dimension)
		}
		if seen[l] {
			p.add("model.sizes", "L = %d appears twice", l)
		}
		seen[l] = true
	}
	if len(m.Betas) == 0 {
		p.add("model.betas", "at least one inverse temperature β is required")
	}
	seenB := map[float64]bool{}
	for _, b := range m.Betas {
		if !(b >= 0) || math.IsInf(b, 0) {
			p.add("model.betas", "β = %v must be finite and ≥ 0", b)
		}
		if seenB[b] {
			p.add("model.betas", "β = %v appears twice", b)
		}
		seenB[b] = true
	}
	s := st.Sample
	for i, v := range s.Sweeps {
		if v > maxSweeps {
			p.add("sample.sweeps", "%d exceeds the limit of %d sweeps per sector", v, maxSweeps)
		}
		if v < 1000 {
			p.add("sample.sweeps", "%d is below the minimum of 1000 measured sweeps per sector", v)
		}
		if len(s.Sweeps) > 1 {
			if i > 0 && v <= s.Sweeps[i-1] {
				p.add("sample.sweeps", "a ladder must increase strictly: %d after %d", v, s.Sweeps[i-1])
			}
			if s.ChunkSweeps > 0 && v%s.ChunkSweeps != 0 {
				p.add("sample.sweeps", "ladder rung %d is not a multiple of chunk_sweeps = %d (rungs share whole chunks)", v, s.ChunkSweeps)
			}
		}
	}
	if len(s.Sweeps) == 0 {
		p.add("sample.sweeps", "give a number of sweeps or a list of them")
	}
	if s.ChunkSweeps > maxSweeps {
		p.add("sample.chunk_sweeps", "%d exceeds the limit of %d", s.ChunkSweeps, maxSweeps)
	}
	if s.Thermalization > maxSweeps {
		p.add("sample.thermalization", "%d exceeds the limit of %d", s.Thermalization, maxSweeps)
	}

	if s.ChunkSweeps < 100 {
		p.add("sample.chunk_sweeps", "%d must be ≥ 100", s.ChunkSweeps)
	}
	if s.BlockSweeps == 0 && s.ChunkSweeps > 0 {
		st.Sample.BlockSweeps = defaultBlock(s.ChunkSweeps)
	} else if s.BlockSweeps < 1 || s.ChunkSweeps%s.BlockSweeps != 0 {
		p.add("sample.block_sweeps", "%d must be ≥ 1 and divide chunk_sweeps = %d", s.BlockSweeps, s.ChunkSweeps)
	}
	for _, l := range st.Model.Sizes {
		if m.Dimension < 1 || m.Dimension > 3 || l < 2 || l > 1<<12 {
			continue // reported above
		}
		if n := uint64(sitesOf(m.Dimension, l)); n*64*uint64(max(st.Sample.BlockSweeps, 1)) >= 1<<32 {
			p.add("sample.block_sweeps", "L = %d: %d sites × 64 lanes × %d sweeps per block overflow the 32-bit counts; lower block_sweeps",
				l, n, st.Sample.BlockSweeps)
		}
	}
	if s.Thermalization < 0 {
		p.add("sample.thermalization", "%d must be ≥ 0", s.Thermalization)
	}
	okEst := false
	for _, e := range ratio.Estimators {
		okEst = okEst || s.Estimator == e
	}
	if !okEst {
		p.add("sample.estimator", "%q is not one of %s", s.Estimator, strings.Join(ratio.Estimators, ", "))
	}
	st.validateSectors(p)
	for _, kv := range []struct {
		k string
		v float64
	}{{"ratios.min_tau_ratio", st.Ratios.MinTauRatio}, {"ratios.warn_tau_ratio", st.Ratios.WarnTauRatio}} {
		if !(kv.v >= 0) || math.IsInf(kv.v, 0) {
			p.add(kv.k, "%v must be finite and ≥ 0", kv.v)
		}
	}
	if st.Stitch.Replicas < 2 || st.Stitch.Replicas > maxReplicas {
		p.add("stitch.replicas", "%d must be in 2..%d", st.Stitch.Replicas, maxReplicas)
	}
	if st.Exact.MaxBits < 256 {
		p.add("exact.max_bits", "%d must be ≥ 256", st.Exact.MaxBits)
	}
	if st.Exact.MaxSites == nil {
		v := stages.DefaultExactMaxSites(m.Dimension)
		st.Exact.MaxSites = &v
	} else if *st.Exact.MaxSites < 0 {
		p.add("exact.max_sites", "%d must be ≥ 0", *st.Exact.MaxSites)
	}
	t := st.Transform
	for _, kv := range []struct {
		k string
		v float64
	}{{"transform.theta_min", t.ThetaMin}, {"transform.theta_max", t.ThetaMax}} {
		if !(kv.v >= 0 && kv.v <= math.Pi/2) {
			p.add(kv.k, "%v is outside [0, π/2]", kv.v)
		}
	}
	if !(t.ThetaMax > t.ThetaMin) {
		p.add("transform.theta_max", "%v must exceed theta_min = %v", t.ThetaMax, t.ThetaMin)
	}
	if t.ThetaPoints < 2 || t.ThetaPoints > 1000001 {
		p.add("transform.theta_points", "%d must be in 2..1000001", t.ThetaPoints)
	}
	if !(t.ReachFactor > 0) || math.IsInf(t.ReachFactor, 0) {
		p.add("transform.reach_factor", "%v must be finite and > 0", t.ReachFactor)
	}
	if !(t.ZeroFraction > 0 && t.ZeroFraction <= 1) {
		p.add("transform.zero_fraction", "%v must be in (0, 1]", t.ZeroFraction)
	}
	switch e := st.Scaling.Exponent.(type) {
	case string:
		if e != "free" {
			p.add("scaling.exponent", "%q must be \"free\" or a number", e)
		}
	case int64:
		st.Scaling.Exponent = float64(e)
	case float64:
	default:
		p.add("scaling.exponent", "%v must be \"free\" or a number", e)
	}
	if x, ok := st.Scaling.Exponent.(float64); ok && (!(x > 0) || math.IsInf(x, 0)) {
		p.add("scaling.exponent", "%v must be finite and > 0", x)
	}
	if st.Scaling.MinSize < 0 {
		p.add("scaling.min_size", "%d must be ≥ 0", st.Scaling.MinSize)
	}
	if st.Fit.Target != "ln_rho" && st.Fit.Target != "ln_ratio" {
		p.add("fit.target", "%q must be \"ln_rho\" or \"ln_ratio\"", st.Fit.Target)
	}
	if st.Fit.Enabled && len(st.Fit.Degrees) == 0 {
		p.add("fit.degrees", "give at least one degree")
	}
	for _, d := range st.Fit.Degrees {
		if d < 1 || d > 64 {
			p.add("fit.degrees", "%d must be in 1..64", d)
		}
	}
	if st.Fit.Enabled && len(p.List) == 0 {
		// a polynomial needs more points than coefficients on every size
		for _, l := range m.Sizes {
			n := sitesOf(m.Dimension, l)
			points := n - n/2 + 1 // ln ρ on k = ⌊N/2⌋ … N, as the fit stage takes it
			if st.Fit.Target == polyfit.LnRatio {
				points = n / 2 // r(M) for M = N, N−2, … > 1
			}
			for _, d := range st.Fit.Degrees {
				if coeffs := len(polyfit.Powers(st.Fit.Target, d)); coeffs > points {
					p.add("fit.degrees", "degree %d has %d coefficients, more than the %d points of L = %d", d, coeffs, points, l)
				}
			}
		}
	}
	st.validateLimits(p)
	if v := st.Cost.ThetaRef; v != nil && !(*v >= 0 && *v <= math.Pi/2) {
		p.add("cost.theta_ref", "%v must be in [0, π/2]", *v)
	}
	r := st.Routes
	if r.MaxOrder < 4 || r.MaxOrder > 40 {
		p.add("routes.max_order", "%d must be in 4..40 (a leading-zero estimate needs four cumulants)", r.MaxOrder)
	}
	if r.Enabled && len(r.Fields) == 0 {
		p.add("routes.fields", "give at least one real field h")
	}
	seenH := map[float64]bool{}
	for _, h := range r.Fields {
		if !(h >= 0 && h <= 5) {
			p.add("routes.fields", "h = %v must be in [0, 5] (h = βH; negative fields mirror positive ones)", h)
		}
		if seenH[h] {
			p.add("routes.fields", "h = %v appears twice", h)
		}
		seenH[h] = true
	}
	st.validateExpect(p)
}

// validateSectors checks [sample] sectors.
func (st *Study) validateSectors(p *Problems) {
	s := st.Sample
	if len(s.Sectors) == 0 {
		p.add("sample.sectors", "list at least one of %s", strings.Join(stages.Representations, ", "))
	}
	seen := map[string]bool{}
	for _, x := range s.Sectors {
		if x != stages.Magnetization && x != stages.Monomer {
			p.add("sample.sectors", "%q is not one of %s", x, strings.Join(stages.Representations, ", "))
		}
		if seen[x] {
			p.add("sample.sectors", "%q appears twice", x)
		}
		seen[x] = true
	}
	if !seen[stages.Monomer] {
		return
	}
	if s.Estimator == ratio.Bennett {
		p.add("sample.estimator", "bennett has no monomer form: monomer sectors use %s or %s", ratio.Insertion, ratio.Indicator)
	}
	for _, l := range st.Model.Sizes {
		if l < 3 {
			p.add("model.sizes", "L = %d: monomer sectors need L ≥ 3 (no double bonds)", l)
		}
	}
	for _, b := range st.Model.Betas {
		if b == 0 {
			p.add("model.betas", "β = 0: monomer sectors need β > 0 (link weight t = tanh β)")
		}
	}
}

// Hard limits, checked at load by every command (plan included), so that
// no input can exhaust memory or overflow a count before any work starts.
const (
	maxNameLen     = 128
	maxSweeps      = 1 << 40
	maxReplicas    = 100000
	maxShards      = 10_000_000
	maxCurveValues = 50_000_000  // replicas × θ points (each a float64, several curves)
	maxDensityVals = 100_000_000 // replicas × (N+1), the stitched replicas
)

func sitesOf(d, l int) int {
	n := 1
	for i := 0; i < d; i++ {
		n *= l
	}
	return n
}

// validateLimits refuses studies whose shard count or replica arrays
// exceed the hard limits; the numbers are in the message.
func (st *Study) validateLimits(p *Problems) {
	if len(p.List) > 0 {
		return // the counts below assume valid sizes and sweeps
	}
	var shards, maxN int64
	perSector := int64(st.Chunks())
	for _, l := range st.Model.Sizes {
		n := int64(sitesOf(st.Model.Dimension, l))
		maxN = max(maxN, n)
		for _, rep := range st.Sample.Sectors {
			shards += int64(len(stages.SectorsOf(rep, st.Sample.Estimator, int(n)))) * perSector * int64(len(st.Model.Betas))
		}
		if shards > maxShards {
			break
		}
	}
	if shards > maxShards {
		p.add("sample.sweeps", "the study needs more than %d shards (sizes %v, %d chunks of %d sweeps per sector); raise chunk_sweeps or lower sweeps or sizes",
			maxShards, st.Model.Sizes, perSector, st.Sample.ChunkSweeps)
	}
	r := int64(st.Stitch.Replicas)
	if v := r * int64(st.Transform.ThetaPoints); v > maxCurveValues {
		p.add("stitch.replicas", "%d replicas × %d θ points = %d values exceeds the limit of %d", r, st.Transform.ThetaPoints, v, maxCurveValues)
	}
	if v := r * (maxN + 1); v > maxDensityVals {
		p.add("stitch.replicas", "%d replicas × %d magnetizations = %d values exceeds the limit of %d", r, maxN+1, v, maxDensityVals)
	}
}

// Chunks returns the number of chunks per sector: sweeps rounded up to
// whole chunks.
func (st *Study) Chunks() int {
	return (st.Sample.Sweeps.Top() + st.Sample.ChunkSweeps - 1) / st.Sample.ChunkSweeps
}

// Canonical returns the study as canonical JSON (fixed field order, floats
// in shortest round-trip form) and its blake3 hash.
func (st *Study) Canonical() ([]byte, cache.Key) {
	b, err := json.Marshal(st)
	if err != nil {
		panic(err)
	}
	return b, cache.Sum(b)
}

// Branch is one (L, β, representation) of a study.
type Branch struct {
	L    int
	Beta float64
	// Sectors is stages.Magnetization or stages.Monomer.
	Sectors string
}

// Monomer reports whether the branch samples monomer sectors.
func (b Branch) Monomer() bool { return b.Sectors == stages.Monomer }

// Suffix is "_monomer" for monomer branches, else "": it tags their
// folders and per-β files.
func (b Branch) Suffix() string { return sectorsSuffix(b.Sectors) }

func sectorsSuffix(sectors string) string {
	if sectors == stages.Monomer {
		return "_monomer"
	}
	return ""
}

// Dir is the branch's output folder name, e.g. L16_beta1 or
// L16_beta1_monomer.
func (b Branch) Dir() string {
	return fmt.Sprintf("L%d_beta%s%s", b.L, fmtFloat(b.Beta), b.Suffix())
}

func fmtFloat(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// Branches returns the branches ordered by β, then L, then
// representation (magnetization first).
func (st *Study) Branches() []Branch {
	var out []Branch
	betas := append([]float64(nil), st.Model.Betas...)
	sort.Float64s(betas)
	sizes := append([]int(nil), st.Model.Sizes...)
	sort.Ints(sizes)
	reps := st.Sample.Sectors
	if len(reps) == 0 {
		reps = []string{stages.Magnetization}
	}
	for _, b := range betas {
		for _, l := range sizes {
			for _, rep := range stages.Representations {
				if slices.Contains(reps, rep) {
					out = append(out, Branch{L: l, Beta: b, Sectors: rep})
				}
			}
		}
	}
	return out
}

// DefaultOutDir returns the default output folder, out/<name> in the
// working directory.
func DefaultOutDir(st *Study) string { return filepath.Join("out", st.Name) }

// DefaultCacheDir returns the default cache, .strata-cache beside the study
// file, unless STRATA_CACHE is set.
func DefaultCacheDir(studyPath string) string {
	if d := os.Getenv("STRATA_CACHE"); d != "" {
		return d
	}
	return filepath.Join(filepath.Dir(studyPath), ".strata-cache")
}

func tomlDecode(doc string, v any) (toml.MetaData, error) { return toml.Decode(doc, v) }
