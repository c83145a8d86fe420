package pipeline

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"strata/cache"
	"strata/stages"
	"strata/stages/ratio"
	"strata/stages/sampler"
)

// ToolVersion is written into manifests.
const ToolVersion = "0.1.0"

// ManifestNode is one node in manifest.json.
type ManifestNode struct {
	Stage   string      `json:"stage"`
	Branch  string      `json:"branch"`
	Label   string      `json:"label,omitempty"`
	Key     cache.Key   `json:"key"`
	Status  string      `json:"status"`
	Seconds float64     `json:"seconds"`
	Inputs  []cache.Key `json:"inputs"`
	Record  string      `json:"record"`
}

// Manifest is manifest.json: provenance of a run.
type Manifest struct {
	Tool string `json:"tool"`
	// Contract is the output layout's version (OutputContract).
	Contract  int            `json:"contract"`
	Version   string         `json:"version"`
	StudyHash cache.Key      `json:"study_hash"`
	Nodes     []ManifestNode `json:"nodes"`
	// Files lists every file of the output folder that strata wrote
	// (relative paths); a later run deletes only files listed here.
	Files []string `json:"files"`
}

// BranchSummary is one branch in summary.json.
type BranchSummary struct {
	Size int     `json:"size"`
	Beta float64 `json:"beta"`
	// Sectors is the representation sampled: "magnetization" or "monomer".
	Sectors           string       `json:"sectors"`
	Dir               string       `json:"dir"`
	FirstZero         *ZeroSummary `json:"first_zero"`
	Reach             *float64     `json:"reach"`
	ReachIsLowerBound bool         `json:"reach_is_lower_bound"`
	ReachBelowZero    *float64     `json:"reach_below_zero"`
	// CPUSeconds sums the sample shards' CPU time (provenance: it differs
	// between runs and is left out of bit-identity and baselines).
	CPUSeconds *float64 `json:"cpu_seconds"`
	// Cost: statistics ladders only.
	Cost           *CostSummary `json:"cost,omitempty"`
	ExactFirstZero *float64     `json:"exact_first_zero"`
	// ExactFirstZeroErr bounds the numerical error of exact_first_zero.
	ExactFirstZeroErr *float64             `json:"exact_first_zero_err"`
	Fit               []FitSummary         `json:"fit,omitempty"`
	Routes            []stages.RouteResult `json:"routes,omitempty"`
	Warnings          []string             `json:"warnings,omitempty"`
}

// ZeroSummary is a branch's first zero with its error; Marginal is true
// when its resolution depended on a fluctuation (stages.MarginalDepth):
// such zeros are left out of the scaling fit.
type ZeroSummary struct {
	Value     float64 `json:"value"`
	Error     float64 `json:"error"`
	Marginal  bool    `json:"marginal"`
	LobeDepth float64 `json:"lobe_depth"` // deepest −sign/σ after the zero
}

// FitSummary is one smoothing degree of a branch.
type FitSummary struct {
	Degree    int      `json:"degree"`
	Chi2Dof   *float64 `json:"chi2_dof"`
	AIC       float64  `json:"aic"`
	BiasOnset *float64 `json:"bias_onset"` // θ beyond which fitted and raw Im m differ by > 2σ
	FirstZero *float64 `json:"first_zero"`
}

// Summary is summary.json: the headline results.
type Summary struct {
	Name      string              `json:"name"`
	Dimension int                 `json:"dimension"`
	Branches  []BranchSummary     `json:"branches"`
	Scaling   []stages.ScalingOut `json:"scaling"`
	// CostFits: statistics ladders only, per β and rung.
	CostFits []CostFit `json:"cost_fits,omitempty"`
	// Comparison: studies that sample both representations, one entry
	// per (L, β).
	Comparison []Comparison `json:"comparison,omitempty"`
}

func ptr(x float64) *float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return nil
	}
	return &x
}

// writeFileAtomic writes an output file atomically (temp file + rename).
func writeFileAtomic(path string, data []byte) error { return cache.WriteFile(path, data, 0o644) }

func writeJSON(path string, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return err
	}
	return writeFileAtomic(path, append(b, '\n'))
}

// Results holds the decoded outputs of a plan's nodes that are in the cache.
type Results struct {
	Plan      *Plan
	Ratios    map[*BranchNodes]*stages.RatiosOut
	Stitch    map[*BranchNodes]*stages.StitchOut
	Exact     map[*BranchNodes]*stages.ExactOut
	ExactD    map[*BranchNodes]*stages.MonomerExactOut
	Transform map[*BranchNodes]*stages.TransformOut
	Routes    map[*BranchNodes]*stages.RoutesOut
	Scaling   map[*ScalingNode]*stages.ScalingOut

	// CPU seconds of each branch's sample shards (provenance)
	CPU map[*BranchNodes]float64

	// while writing an output folder: its root and the files written
	outRoot  string
	produced map[string]bool
}

func load[T any](c *cache.Cache, n *Node) (*T, error) {
	if n == nil {
		return nil, nil
	}
	b, err := c.Get(n.Key)
	if err != nil {
		return nil, err
	}
	v := new(T)
	if err := json.Unmarshal(b, v); err != nil {
		return nil, fmt.Errorf("%s: %w", n.Name(), err)
	}
	return v, nil
}

// load reads one branch's (or rung's) outputs.
func (r *Results) load(c *cache.Cache, b *BranchNodes) {
	if v, err := load[stages.RatiosOut](c, b.Ratios); err == nil {
		r.Ratios[b] = v
	}
	if v, err := load[stages.StitchOut](c, b.Stitch); err == nil {
		r.Stitch[b] = v
	}
	if v, err := load[stages.ExactOut](c, b.Exact); err == nil && v != nil {
		r.Exact[b] = v
	}
	if v, err := load[stages.MonomerExactOut](c, b.ExactD); err == nil && v != nil {
		r.ExactD[b] = v
	}
	if v, err := load[stages.TransformOut](c, b.Transform); err == nil {
		r.Transform[b] = v
	}
	if v, err := load[stages.RoutesOut](c, b.Routes); err == nil && v != nil {
		r.Routes[b] = v
	}
	for _, s := range b.Samples {
		if m, err := c.Meta(s.Key); err == nil {
			var sm ShardMeta
			if json.Unmarshal(m, &sm) == nil {
				r.CPU[b] += sm.CPUSeconds
			}
		}
	}
}

// LoadResults reads whatever of the plan's outputs the cache holds.
func LoadResults(c *cache.Cache, p *Plan) *Results {
	r := &Results{Plan: p, Ratios: map[*BranchNodes]*stages.RatiosOut{}, Stitch: map[*BranchNodes]*stages.StitchOut{},
		Exact: map[*BranchNodes]*stages.ExactOut{}, ExactD: map[*BranchNodes]*stages.MonomerExactOut{}, Transform: map[*BranchNodes]*stages.TransformOut{},
		Routes: map[*BranchNodes]*stages.RoutesOut{}, Scaling: map[*ScalingNode]*stages.ScalingOut{},
		CPU: map[*BranchNodes]float64{}}
	for _, b := range p.Branches {
		r.load(c, b)
		for _, rb := range b.Rungs {
			r.load(c, rb)
		}
	}
	for _, s := range p.Scaling {
		if v, err := load[stages.ScalingOut](c, s.Node); err == nil {
			r.Scaling[s] = v
		}
	}
	return r
}

// BuildSummary assembles summary.json from the results.
func (r *Results) BuildSummary() Summary {
	st := r.Plan.Study
	s := Summary{Name: st.Name, Dimension: st.Model.Dimension, Branches: []BranchSummary{}, Scaling: []stages.ScalingOut{}}
	for _, b := range r.Plan.Branches {
		bs := BranchSummary{Size: b.Branch.L, Beta: b.Branch.Beta, Sectors: b.Branch.Sectors, Dir: b.Branch.Dir()}
		if t := r.Transform[b]; t != nil {
			if t.FirstZero != nil {
				bs.FirstZero = &ZeroSummary{Value: t.FirstZero.Value, Error: t.FirstZero.Error, Marginal: t.ZeroMarginal,
					LobeDepth: float64(t.ZeroLobeDepth)}
			}
			bs.Reach = ptr(float64(t.Reach))
			bs.ReachIsLowerBound = t.ReachLowerBound
			bs.ReachBelowZero = ptr(float64(t.ReachBelowZero))
			bs.ExactFirstZero = ptr(float64(t.ExactFirstZero))
			for _, f := range t.Fits {
				bs.Fit = append(bs.Fit, FitSummary{Degree: f.Degree, Chi2Dof: ptr(float64(f.Chi2Dof)), AIC: f.AIC,
					BiasOnset: ptr(float64(f.BiasOnset)), FirstZero: ptr(float64(f.FirstZero))})
			}
		} else if e := r.Exact[b]; e != nil {
			bs.ExactFirstZero = ptr(float64(e.FirstZero))
		}
		if e := r.Exact[b]; e != nil && bs.ExactFirstZero != nil {
			bs.ExactFirstZeroErr = ptr(float64(e.FirstZeroErr))
		}
		if ro := r.Routes[b]; ro != nil {
			bs.Routes = ro.Routes
		}
		if cpu, ok := r.CPU[b]; ok {
			bs.CPUSeconds = ptr(cpu)
		}
		if len(b.Rungs) > 0 {
			bs.Cost = r.costSummary(b)
		}
		if sv := r.Stitch[b]; sv != nil {
			bs.Warnings = sv.Warnings
		}
		s.Branches = append(s.Branches, bs)
	}
	s.CostFits = r.costFits()
	for _, sn := range r.Plan.Scaling {
		if v := r.Scaling[sn]; v != nil {
			out := *v
			out.Sectors = sectorsName(sn.Sectors)
			s.Scaling = append(s.Scaling, out)
		}
	}
	s.Comparison = r.comparisons()
	return s
}

// sectorsName maps the internal "" to "magnetization".
func sectorsName(s string) string {
	if s == "" {
		return stages.Magnetization
	}
	return s
}

func g(x float64) string {
	if math.IsNaN(x) {
		return "nan"
	}
	if math.IsInf(x, 0) {
		if x > 0 {
			return "inf"
		}
		return "-inf"
	}
	return stages.F(x + 0) // +0 turns −0 into 0
}

// csvTable renders columns as CSV with a header line.
func csvTable(header []string, cols [][]float64) []byte {
	var b bytes.Buffer
	b.WriteString(strings.Join(header, ","))
	b.WriteByte('\n')
	if len(cols) == 0 {
		return b.Bytes()
	}
	for i := range cols[0] {
		for j, c := range cols {
			if j > 0 {
				b.WriteByte(',')
			}
			b.WriteString(g(c[i]))
		}
		b.WriteByte('\n')
	}
	return b.Bytes()
}

// Materialize writes the output folder from the cache: manifest.json,
// summary.json, the per-branch CSVs and the samples. Every file is written
// atomically; nothing in the cache is modified.
//
// studyText is the study file as given (with any overrides noted); it is
// shown in the report, whose path is returned.
func Materialize(c *cache.Cache, p *Plan, ran []*Node, outDir, studyText string) (*Results, string, error) {
	gen, err := newGeneration(outDir)
	if err != nil {
		return nil, "", err
	}
	res, man, err := materializeInto(c, p, ran, gen.dir, studyText)
	if err == nil {
		err = gen.finish(man)
	}
	if err != nil {
		gen.abandon()
		return nil, "", err
	}
	return res, filepath.Join(outDir, "report.html"), nil
}

// materializeInto writes every output into dir and returns the manifest,
// whose Files list what was written.
func materializeInto(c *cache.Cache, p *Plan, ran []*Node, dir, studyText string) (*Results, Manifest, error) {
	_, hash := p.Study.Canonical()
	man := Manifest{Tool: "strata", Contract: OutputContract, Version: ToolVersion, StudyHash: hash, Nodes: []ManifestNode{}}
	for _, n := range ran {
		mn := ManifestNode{Stage: n.Task.Stage, Branch: n.Branch, Label: n.Label, Key: n.Key,
			Status: n.Status, Seconds: n.Seconds, Inputs: []cache.Key{}, Record: n.Record}
		if n.Err != nil {
			mn.Status = "failed"
		}
		for _, in := range n.Inputs {
			mn.Inputs = append(mn.Inputs, in.Key)
		}
		man.Nodes = append(man.Nodes, mn)
	}
	res := LoadResults(c, p)
	res.outRoot, res.produced = dir, map[string]bool{}
	for _, b := range p.Branches {
		if err := res.writeBranch(c, b, dir); err != nil {
			return nil, man, err
		}
	}
	for _, sn := range p.Scaling {
		if v := res.Scaling[sn]; v != nil {
			sv := *v
			sv.Sectors = sn.Sectors
			path, err := writeScalingCSV(dir, &sv)
			if err != nil {
				return nil, man, err
			}
			res.record(path)
		}
	}
	if err := res.writeJSON(filepath.Join(dir, "summary.json"), res.BuildSummary()); err != nil {
		return nil, man, err
	}
	if _, err := res.writeReport(dir, man, studyText); err != nil {
		return nil, man, err
	}
	res.record(filepath.Join(dir, "manifest.json"))
	for f := range res.produced {
		man.Files = append(man.Files, f)
	}
	sort.Strings(man.Files)
	return res, man, writeJSON(filepath.Join(dir, "manifest.json"), man)
}

// record notes a file the run wrote (or kept, unchanged) in the output.
func (r *Results) record(path string) {
	if r.produced == nil {
		return
	}
	if rel, err := filepath.Rel(r.outRoot, path); err == nil {
		r.produced[filepath.ToSlash(rel)] = true
	}
}

func (r *Results) writeFile(path string, data []byte) error {
	r.record(path)
	return writeIfChanged(path, data)
}

func (r *Results) writeJSON(path string, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return err
	}
	return r.writeFile(path, append(b, '\n'))
}

// table is one CSV file: its name, header and columns.
type table struct {
	name   string
	header []string
	cols   [][]float64
}

// col returns the column with the given header, or nil.
func (t *table) col(name string) []float64 {
	for i, h := range t.header {
		if h == name {
			return t.cols[i]
		}
	}
	return nil
}

func (t *table) add(name string, c []float64) {
	t.header = append(t.header, name)
	t.cols = append(t.cols, c)
}

// branchTables returns the CSV tables of one branch; the CSV files and the
// figures are both made from them.
func (r *Results) branchTables(b *BranchNodes) map[string]*table {
	out := map[string]*table{}
	ex := r.Exact[b]
	if ex != nil && ex.LnRho == nil {
		ex = nil // a ring too large for the exact ρ(M) table
	}
	// ratios.csv from the ratios stage itself, so that a run stopped there
	// (--stages sample,ratios) still writes it
	if q := r.Ratios[b]; q != nil {
		n := q.N
		var ms, lr, le, tau []float64
		for _, x := range q.Result.Ratios {
			ms = append(ms, float64(x.M))
			lr = append(lr, x.LnR)
			le = append(le, x.Err)
			tau = append(tau, x.Tau)
		}
		t := &table{name: "ratios.csv"}
		t.add(labelName(b), ms)
		t.add("ln_ratio", lr)
		t.add("ln_ratio_err", le)
		t.add("tau_int", tau)
		if xd := r.ExactD[b]; b.Branch.Monomer() && xd != nil {
			e := make([]float64, len(ms))
			for i, m := range ms {
				e[i] = xd.LnD[int(m)/2] - xd.LnD[int(m)/2-1]
			}
			t.add("ln_ratio_exact", e)
		} else if ex != nil && !b.Branch.Monomer() {
			e := make([]float64, len(ms))
			for i, m := range ms {
				k := (int(m) + n) / 2
				e[i] = ex.LnRho[k] - ex.LnRho[k-1]
			}
			t.add("ln_ratio_exact", e)
		}
		out["ratios"] = t
	}
	if s := r.Stitch[b]; s != nil && b.Branch.Monomer() {
		ns := make([]float64, len(s.LnRho))
		for k := range ns {
			ns[k] = float64(2 * k)
		}
		d := &table{name: "density.csv"}
		d.add("n", ns)
		d.add("ln_D", s.LnRho)
		d.add("ln_D_err", s.LnRhoErr)
		if xd := r.ExactD[b]; xd != nil {
			d.add("ln_D_exact", xd.LnD)
		}
		out["density"] = d
	} else if s != nil {
		all := make([]float64, s.N+1)
		for k := range all {
			all[k] = float64(2*k - s.N)
		}
		d := &table{name: "density.csv"}
		d.add("M", all)
		d.add("ln_rho", s.LnRho)
		d.add("ln_rho_err", s.LnRhoErr)
		if ex != nil {
			d.add("ln_rho_exact", ex.LnRho)
			d.add("ln_rho_exact_err", ex.LnRhoErr)
		}
		out["density"] = d
	}
	if tr := r.Transform[b]; tr != nil {
		t := &table{name: "transform.csv"}
		t.add("theta", tr.Theta)
		t.add("sign", stages.Floats(tr.Sign))
		t.add("sign_err", stages.Floats(tr.SignErr))
		t.add("im_m", stages.Floats(tr.ImM))
		t.add("im_m_err", stages.Floats(tr.ImMErr))
		t.add("delta_f", stages.Floats(tr.DeltaF))
		t.add("delta_f_err", stages.Floats(tr.DeltaFErr))
		if tr.HasExact {
			t.add("sign_exact", stages.Floats(tr.SignExact))
			t.add("im_m_exact", stages.Floats(tr.ImMExact))
		}
		for _, f := range tr.Fits {
			t.add(fmt.Sprintf("sign_fit%d", f.Degree), stages.Floats(f.Sign))
			t.add(fmt.Sprintf("im_m_fit%d", f.Degree), stages.Floats(f.ImM))
		}
		out["transform"] = t
	}
	if ro := r.Routes[b]; ro != nil {
		t := &table{name: "routes.csv"}
		t.add("theta", ro.Theta)
		for _, pc := range ro.Phase {
			t.add("sign_"+pc.Route, stages.Floats(pc.Sign))
			t.add("sign_"+pc.Route+"_err", stages.Floats(pc.SignErr))
		}
		for _, pc := range ro.Phase {
			if pc.SignExact != nil {
				t.add("sign_"+pc.Route+"_exact", stages.Floats(pc.SignExact))
			}
		}
		out["routes"] = t
		c := &table{name: "cumulants.csv"}
		var cols [10][]float64
		for _, row := range ro.Cumulants {
			for i, v := range []float64{row.H, float64(row.Order), float64(row.Kappa), float64(row.KappaErr),
				float64(row.Theta1), float64(row.Theta1Err), float64(row.Theta1Trunc), float64(row.ReH),
				float64(row.KappaExact), float64(row.Theta1Ex)} {
				cols[i] = append(cols[i], v)
			}
		}
		for i, name := range []string{"h", "order", "kappa", "kappa_err", "theta1", "theta1_err", "theta1_trunc", "re_h", "kappa_exact", "theta1_exact"} {
			c.add(name, cols[i])
		}
		out["cumulants"] = c
	}
	return out
}

func (r *Results) writeBranch(c *cache.Cache, b *BranchNodes, outDir string) error {
	dir := filepath.Join(outDir, b.OutDir())
	tables := r.branchTables(b)
	for _, key := range []string{"ratios", "density", "transform", "routes", "cumulants"} {
		if t := tables[key]; t != nil {
			if err := r.writeFile(filepath.Join(dir, t.name), csvTable(t.header, t.cols)); err != nil {
				return err
			}
		}
	}
	if b.Rung > 0 {
		return nil // a ladder's lower rung: its samples are the branch's first chunks
	}
	for _, rb := range b.Rungs {
		if err := r.writeBranch(c, rb, outDir); err != nil {
			return err
		}
	}
	if len(b.Rungs) > 0 {
		if t := r.costTable(b); t != nil {
			if err := r.writeFile(filepath.Join(dir, t.name), csvTable(t.header, t.cols)); err != nil {
				return err
			}
		}
	}
	return writeSamples(c, b, r.Plan.Study, filepath.Join(dir, "samples"), r.record)
}

// writeSamples hard-links each cached shard's .npy into dir (copying when
// links are not possible) and writes its metadata sidecar.
func writeSamples(c *cache.Cache, b *BranchNodes, st *Study, dir string, record func(string)) error {
	for i, n := range b.Samples {
		src, err := c.DataPath(n.Key)
		if err != nil {
			continue // not sampled yet
		}
		sh := b.Shards[i]
		label := "M"
		if b.Branch.Monomer() {
			label = "n"
		}
		base := filepath.Join(dir, fmt.Sprintf("%s%d_chunk%d", label, sh.M, sh.Chunk))
		if err := os.MkdirAll(dir, 0o777); err != nil {
			return err
		}
		if err := linkObject(src, base+".npy"); err != nil {
			return err
		}
		record(base + ".npy")
		record(base + ".json")
		meta := map[string]any{
			"estimator": st.Sample.Estimator, "beta": b.Branch.Beta, "size": b.Branch.L,
			"dimension": st.Model.Dimension, "sites": b.N, "chunk": sh.Chunk,
			"sweeps": st.Sample.ChunkSweeps, "thermalization": st.Sample.Thermalization,
			"study_seed": st.Sample.Seed, "seed": shardSeed(st, b.Branch, sh.M, sh.Chunk),
			"columns": sampleColumns(st.Sample.Estimator, st.Model.Dimension), "key": n.Key,
		}
		if b.Branch.Monomer() {
			meta["sectors"], meta["monomers"] = stages.Monomer, sh.M
			meta["columns"] = monomerColumns(st.Sample.Estimator)
			meta["dtype"], meta["rows"] = "float64", "one per sweep"
		} else {
			chain := ratio.ChainOf(st.Sample.Estimator)
			meta["magnetization"], meta["chain"] = sh.M, chain
			meta["lanes"], meta["block_sweeps"] = sampler.Lanes, st.Sample.BlockSweeps
			meta["dtype"] = "uint32"
			meta["rows"] = fmt.Sprintf("one per block of %d sweeps, counts summed over the block's sweeps and the %d lanes", st.Sample.BlockSweeps, sampler.Lanes)
			meta["columns"] = sampleColumns(chain, st.Model.Dimension)
			delete(meta, "estimator")
			meta["estimators"] = chainEstimators(chain)
		}
		meta["contract"] = OutputContract
		data, err := json.MarshalIndent(meta, "", "  ")
		if err != nil {
			return err
		}
		if err := writeIfChanged(base+".json", append(data, '\n')); err != nil {
			return err
		}
	}
	return nil
}

// linkObject makes dst a hard link to the cache object src (a copy where
// links are impossible), atomically; nothing is done when dst already is
// that object (renaming a second link of the same file over it would leave
// the temp name behind).
func linkObject(src, dst string) error {
	if a, err := os.Stat(dst); err == nil {
		if b, err := os.Stat(src); err == nil && os.SameFile(a, b) {
			return nil
		}
	}
	tmp := dst + ".tmp"
	os.Remove(tmp)
	if err := os.Link(src, tmp); err != nil {
		data, rerr := os.ReadFile(src)
		if rerr != nil {
			return rerr
		}
		if err := os.WriteFile(tmp, data, 0o444); err != nil {
			return err
		}
	}
	if err := os.Rename(tmp, dst); err != nil {
		os.Remove(tmp)
		return err
	}
	return nil
}

// writeIfChanged writes path atomically unless it already holds data.
func writeIfChanged(path string, data []byte) error {
	if old, err := os.ReadFile(path); err == nil && bytes.Equal(old, data) {
		return nil
	}
	return writeFileAtomic(path, data)
}

// sampleColumns describes the columns of a compact magnetization shard.
func sampleColumns(chain string, d int) []string {
	if chain == ratio.ChainPair {
		return []string{"lane-proposals after which the lane was in sector M (two-sector chain {M, M-2})",
			"all lane-proposals (N per sweep and lane)"}
	}
	var out []string
	for _, s := range []string{"up", "down"} {
		for h := -2 * d; h <= 2*d; h += 2 {
			out = append(out, fmt.Sprintf("(site, lane, sweep) triples with spin %s (sign %s1) and local field h = %d", s, map[string]string{"up": "+", "down": "-"}[s], h))
		}
	}
	return out
}

// chainEstimators lists the estimators that read a chain's shards.
func chainEstimators(chain string) []string {
	if chain == ratio.ChainPair {
		return []string{ratio.Indicator}
	}
	return []string{ratio.Insertion, ratio.Bennett}
}

// OutputContract versions the layout of the output folder (README,
// "Outputs"): 2 since the compact uint32 samples.
const OutputContract = 2

// monomerColumns describes the columns of a monomer shard.
func monomerColumns(estimator string) []string {
	if estimator == "indicator" {
		return []string{"fraction of bond proposals after which the two-sector chain {n-2, n} was in sector n"}
	}
	return []string{"A: sum over bonds with both ends even of t^(1-2k), t = tanh(beta), k = 0/1 the bond's occupation",
		"B: number of bonds with both ends odd"}
}

// labelName is the sector column of a branch's tables: M or n.
func labelName(b *BranchNodes) string {
	if b.Branch.Monomer() {
		return "n"
	}
	return "M"
}

func writeScalingCSV(outDir string, v *stages.ScalingOut) (string, error) {
	var ls, th, er, ex []float64
	val := func(p *float64) float64 {
		if p == nil {
			return math.NaN()
		}
		return *p
	}
	for _, p := range v.Points {
		ls = append(ls, float64(p.L))
		th = append(th, val(p.Theta1))
		er = append(er, val(p.Theta1Err))
		ex = append(ex, val(p.Theta1Exact))
	}
	path := filepath.Join(outDir, "scaling_beta"+stages.F(v.Beta)+sectorsSuffix(v.Sectors)+".csv")
	_ = os.MkdirAll(outDir, 0o777)
	return path, writeIfChanged(path, csvTable([]string{"L", "theta1", "theta1_err", "theta1_exact"}, [][]float64{ls, th, er, ex}))
}
