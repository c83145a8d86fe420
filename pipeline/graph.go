package pipeline

import (
	"encoding/binary"
	"fmt"
	"math"
	"path/filepath"
	"sort"
	"strings"

	"strata/cache"
	"strata/stages"
	"strata/stages/ratio"
)

// CacheFormat salts every key; bump it when the record layout or the
// encoding of stored objects changes.
const CacheFormat = "strata-cache v1"

// Node is one cached computation in a study's graph.
type Node struct {
	Task   stages.Task
	Branch string // branch folder (L16_beta1), or beta<β> for joins
	Label  string // identity within the branch, e.g. "M=12 chunk=3"
	Inputs []*Node
	Key    cache.Key
	Record string // the text hashed into Key

	level int
	// cost estimates sample work (sweeps × N) for shard balancing
	cost float64
	// filled by a run
	Status     string
	Seconds    float64
	CPUSeconds float64 // sample shards computed in this run: thread CPU time
	Err        error
}

// Name is the node's display name.
func (n *Node) Name() string {
	s := n.Task.Stage + " " + n.Branch
	if n.Label != "" {
		s += " " + n.Label
	}
	return s
}

// record builds the text record behind a node's key: one line per
// influence. Anything new that can change a stage's output must appear
// here (through the task's params or version).
func (n *Node) record() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s\nstage %s\nversion %d\n", CacheFormat, n.Task.Stage, n.Task.Version)
	ps := append([]stages.Param(nil), n.Task.Params...)
	sort.Slice(ps, func(i, j int) bool { return ps[i].Name < ps[j].Name })
	for _, p := range ps {
		fmt.Fprintf(&b, "param %s %s\n", p.Name, p.Value)
	}
	for _, in := range n.Inputs {
		fmt.Fprintf(&b, "input %s\n", in.Key)
	}
	return b.String()
}

func newNode(t stages.Task, branch, label string, inputs ...*Node) *Node {
	n := &Node{Task: t, Branch: branch, Label: label, Inputs: inputs}
	for _, in := range inputs {
		if in.level+1 > n.level {
			n.level = in.level + 1
		}
	}
	n.Record = n.record()
	n.Key = cache.Sum([]byte(n.Record))
	return n
}

// BranchNodes are the nodes of one (L, β).
type BranchNodes struct {
	Branch  Branch
	N       int
	Samples []*Node
	Shards  []stages.Shard
	Ratios  *Node
	Stitch  *Node
	Exact   *Node // nil when no exact reference exists
	// ExactD is the exact monomer density (monomer branches where exact
	// integer counts or the ring's link transfer matrix give it), else nil.
	ExactD    *Node
	Fit       *Node // nil unless [fit] enabled
	Transform *Node
	Routes    *Node // nil unless [routes] enabled
	// Rung is the sweeps of a ladder's lower rung (0 for the top, which is
	// the branch itself); Rungs are the lower rungs of a branch.
	Rung  int
	Rungs []*BranchNodes
}

// OutDir is the branch's output folder, rung<sweeps>/ inside it for a
// lower rung of a ladder.
func (b *BranchNodes) OutDir() string {
	if b.Rung > 0 {
		return filepath.Join(b.Branch.Dir(), fmt.Sprintf("rung%d", b.Rung))
	}
	return b.Branch.Dir()
}

// Plan is a study's full graph in dependency order.
type Plan struct {
	Study    *Study
	Branches []*BranchNodes
	Scaling  []*ScalingNode
	Nodes    []*Node
}

// ScalingNode joins the branches of one β and one representation.
type ScalingNode struct {
	Beta    float64
	Sectors string
	Sizes   []int
	Node    *Node
}

// seedOf derives a generator seed from the first 8 bytes of the blake3
// hash of a text record (one value per line).
func seedOf(format string, args ...any) uint64 {
	k := cache.Sum([]byte(fmt.Sprintf(format, args...)))
	return binary.LittleEndian.Uint64(k[:8])
}

// shardSeed derives a shard's generator seed by hashing its identity
// (monomer chains add their representation to it).
func shardSeed(st *Study, b Branch, m, chunk int) uint64 {
	if b.Monomer() {
		return seedOf("shard-seed\n%d\n%d\n%d\n%s\n%s\n%d\n%d\nmonomer\n", st.Sample.Seed, st.Model.Dimension, b.L,
			stages.F(b.Beta), st.Sample.Estimator, m, chunk)
	}
	// magnetization: by the chain, so that estimators reading the same
	// chain (insertion, bennett) share shards
	return seedOf("shard-seed-lanes\n%d\n%d\n%d\n%s\n%s\n%d\n%d\n", st.Sample.Seed, st.Model.Dimension, b.L,
		stages.F(b.Beta), ratio.ChainOf(st.Sample.Estimator), m, chunk)
}

func replicaSeed(st *Study, b Branch) uint64 {
	if b.Monomer() {
		return seedOf("replica-seed\n%d\n%d\n%d\n%s\nmonomer\n", st.Sample.Seed, st.Model.Dimension, b.L, stages.F(b.Beta))
	}
	return seedOf("replica-seed\n%d\n%d\n%d\n%s\n", st.Sample.Seed, st.Model.Dimension, b.L, stages.F(b.Beta))
}

// BuildPlan builds the graph of a study.
func BuildPlan(st *Study) *Plan {
	p := &Plan{Study: st}
	d := st.Model.Dimension
	tp := stages.TransformParams{ThetaMin: st.Transform.ThetaMin, ThetaMax: st.Transform.ThetaMax,
		Points: st.Transform.ThetaPoints, ReachFactor: st.Transform.ReachFactor,
		ZeroFraction: st.Transform.ZeroFraction, MaxBits: st.Exact.MaxBits}
	byBeta := map[scalingKey][]*BranchNodes{}
	counts := map[int]*Node{} // β-independent exact counts per size
	type lb struct {
		l    int
		beta float64
	}
	exacts := map[lb]*Node{} // one exact reference per (L, β), shared by the representations
	for _, b := range st.Branches() {
		n := int(math.Round(math.Pow(float64(b.L), float64(d))))
		bn := &BranchNodes{Branch: b, N: n}
		dir := b.Dir()
		sectors := ""
		if b.Monomer() {
			sectors = stages.Monomer
		}
		for _, m := range stages.SectorsOf(b.Sectors, st.Sample.Estimator, n) {
			for c := 0; c < st.Chunks(); c++ {
				sp := stages.SampleParams{D: d, L: b.L, Beta: b.Beta, Estimator: st.Sample.Estimator, Sectors: sectors,
					M: m, Chunk: c, Sweeps: st.Sample.ChunkSweeps, Therm: st.Sample.Thermalization,
					Block: st.Sample.BlockSweeps, Seed: shardSeed(st, b, m, c)}
				node := newNode(stages.Sample(sp), dir, fmt.Sprintf("%s chunk=%d", sectorLabel(b, m), c))
				node.cost = float64(st.Sample.ChunkSweeps+st.Sample.Thermalization) * float64(n)
				bn.Samples = append(bn.Samples, node)
				bn.Shards = append(bn.Shards, stages.Shard{M: m, Chunk: c})
			}
		}
		countsNode := func() *Node {
			cn := counts[b.L]
			if cn == nil {
				cn = newNode(stages.ExactCountsTask(d, b.L), fmt.Sprintf("counts_L%d", b.L), "")
				counts[b.L] = cn
				p.Nodes = append(p.Nodes, cn)
			}
			return cn
		}
		if kind := st.exactKind(b); kind != "" {
			if en := exacts[lb{b.L, b.Beta}]; en != nil {
				bn.Exact = en
			} else {
				var ein []*Node
				switch kind {
				case stages.ExactCounts:
					ein = append(ein, countsNode())
				case stages.ExactDensity:
					dn := newNode(stages.ExactDensityTask(d, b.L, b.Beta), dir, "")
					p.Nodes = append(p.Nodes, dn)
					ein = append(ein, dn)
				}
				bn.Exact = newNode(stages.Exact(d, b.L, b.Beta, kind), Branch{L: b.L, Beta: b.Beta}.Dir(), "", ein...)
				exacts[lb{b.L, b.Beta}] = bn.Exact
				p.Nodes = append(p.Nodes, bn.Exact)
			}
			if b.Monomer() && stages.MonomerExactAvailable(d, b.L) {
				var ein []*Node
				if d > 1 {
					ein = append(ein, countsNode())
				}
				bn.ExactD = newNode(stages.ExactMonomer(d, b.L, b.Beta, st.Exact.MaxBits), dir, "", ein...)
				p.Nodes = append(p.Nodes, bn.ExactD)
			}
		}
		p.Branches = append(p.Branches, bn)
		sk := scalingKey{b.Beta, b.Sectors}
		byBeta[sk] = append(byBeta[sk], bn)
		p.Nodes = append(p.Nodes, bn.Samples...)
		p.analyse(bn, tp, "")
		// the lower rungs of a statistics ladder: the same analysis on the
		// first chunks of every sector (the same shards, nested)
		for _, sw := range st.Sample.Sweeps[:len(st.Sample.Sweeps)-1] {
			k := sw / st.Sample.ChunkSweeps
			rb := &BranchNodes{Branch: b, N: n, Rung: sw, Exact: bn.Exact, ExactD: bn.ExactD}
			for i, sh := range bn.Shards {
				if sh.Chunk < k {
					rb.Samples = append(rb.Samples, bn.Samples[i])
					rb.Shards = append(rb.Shards, sh)
				}
			}
			p.analyse(rb, tp, fmt.Sprintf("rung %d", sw))
			bn.Rungs = append(bn.Rungs, rb)
		}
	}
	p.addScaling(st, byBeta)
	sort.SliceStable(p.Nodes, func(i, j int) bool { return p.Nodes[i].level < p.Nodes[j].level })
	return p
}

// analyse adds a branch's (or a rung's) analysis nodes: ratios, stitch,
// fit, transform and routes, from its samples and its exact reference.
func (p *Plan) analyse(bn *BranchNodes, tp stages.TransformParams, label string) {
	st, b, dir := p.Study, bn.Branch, bn.Branch.Dir()
	d := st.Model.Dimension
	sectors := ""
	if b.Monomer() {
		sectors = stages.Monomer
	}
	bn.Ratios = newNode(stages.Ratios(stages.RatiosParams{D: d, L: b.L, Beta: b.Beta, Sectors: sectors, Block: st.Sample.BlockSweeps,
		Estimator: st.Sample.Estimator, MinTauRatio: st.Ratios.MinTauRatio,
		WarnTauRatio: st.Ratios.WarnTauRatio, Shards: bn.Shards}), dir, label, bn.Samples...)
	bn.Stitch = newNode(stages.Stitch(st.Stitch.Replicas, replicaSeed(st, b)), dir, label, bn.Ratios)
	tin := []*Node{bn.Stitch}
	if bn.Exact != nil {
		tin = append(tin, bn.Exact)
	}
	btp := tp
	btp.HasExact = bn.Exact != nil
	btp.Sectors = sectors
	if st.Fit.Enabled && !b.Monomer() {
		bn.Fit = newNode(stages.Fit(st.Fit.Target, st.Fit.Degrees), dir, label, bn.Stitch)
		tin = append(tin, bn.Fit)
		btp.HasFit = true
	}
	bn.Transform = newNode(stages.Transform(btp), dir, label, tin...)
	if st.Routes.Enabled && !b.Monomer() {
		rin := []*Node{bn.Stitch, bn.Transform}
		if bn.Exact != nil {
			rin = append(rin, bn.Exact)
		}
		bn.Routes = newNode(stages.Routes(stages.RoutesParams{MaxOrder: st.Routes.MaxOrder, Fields: st.Routes.Fields,
			HasExact: bn.Exact != nil}), dir, label, rin...)
	}
	p.Nodes = append(p.Nodes, bn.Ratios, bn.Stitch)
	if bn.Fit != nil {
		p.Nodes = append(p.Nodes, bn.Fit)
	}
	p.Nodes = append(p.Nodes, bn.Transform)
	if bn.Routes != nil {
		p.Nodes = append(p.Nodes, bn.Routes)
	}
}

// ShardOf assigns sample nodes to K tasks, balanced by cost with the
// longest-processing-time-first rule; ties keep plan order, so the
// assignment is deterministic. It returns the task index of each node.
func ShardOf(nodes []*Node, k int) map[*Node]int {
	idx := make([]int, len(nodes))
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return nodes[idx[a]].cost > nodes[idx[b]].cost })
	load := make([]float64, k)
	out := map[*Node]int{}
	for _, i := range idx {
		best := 0
		for t := 1; t < k; t++ {
			if load[t] < load[best] {
				best = t
			}
		}
		load[best] += nodes[i].cost
		out[nodes[i]] = best
	}
	return out
}

// scalingKey groups branches for finite-size scaling: one β, one
// representation.
type scalingKey struct {
	beta    float64
	sectors string
}

// sectorLabel names a chain in node labels: "M=4" or "n=4".
func sectorLabel(b Branch, m int) string {
	if b.Monomer() {
		return fmt.Sprintf("n=%d", m)
	}
	return fmt.Sprintf("M=%d", m)
}

func (p *Plan) addScaling(st *Study, byBeta map[scalingKey][]*BranchNodes) {
	exp := math.NaN()
	if x, ok := st.Scaling.Exponent.(float64); ok {
		exp = x
	}
	var keys []scalingKey
	for k := range byBeta {
		keys = append(keys, k)
	}
	sort.Slice(keys, func(i, j int) bool {
		if keys[i].beta != keys[j].beta {
			return keys[i].beta < keys[j].beta
		}
		return keys[i].sectors < keys[j].sectors // magnetization before monomer
	})
	for _, k := range keys {
		beta := k.beta
		bns := byBeta[k]
		sn := &ScalingNode{Beta: beta, Sectors: k.sectors}
		var ins []*Node
		for _, bn := range bns {
			sn.Sizes = append(sn.Sizes, bn.Branch.L)
			ins = append(ins, bn.Transform)
		}
		seed := seedOf("scaling-seed\n%d\n%s\n", st.Sample.Seed, stages.F(beta))
		sectors := ""
		if k.sectors == stages.Monomer {
			seed = seedOf("scaling-seed\n%d\n%s\nmonomer\n", st.Sample.Seed, stages.F(beta))
			sectors = stages.Monomer
		}
		sn.Node = newNode(stages.Scaling(stages.ScalingParams{Dimension: st.Model.Dimension, Beta: beta,
			Sizes: sn.Sizes, Exponent: exp, Correction: st.Scaling.Correction, MinSize: st.Scaling.MinSize,
			Replicas: st.Stitch.Replicas, Seed: seed, Sectors: sectors}),
			"beta"+stages.F(beta)+sectorsSuffix(k.sectors), "", ins...)
		p.Scaling = append(p.Scaling, sn)
		p.Nodes = append(p.Nodes, sn.Node)
	}
}
