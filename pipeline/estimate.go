package pipeline

import (
	"bufio"
	"fmt"
	"os"
	"runtime"
	"strconv"
	"strings"
	"syscall"

	"strata/cache"
	"strata/stages"
	"strata/stages/exact"
	"strata/stages/ratio"
)

// Estimate is what a run of a plan needs: the bytes its new cache objects
// take on disk and its peak memory (the largest node, times the workers
// that may run such nodes at once, plus a base).
type Estimate struct {
	DiskBytes, MemBytes int64
	Largest             string // the node that sets MemBytes
}

// baseMemory is what the process holds besides its nodes (common practice:
// measured idle heap and binary, rounded up).
const baseMemory = 64 << 20

// EstimatePlan estimates the resources for the nodes not yet in c (every
// node when c is nil) with jobs workers. Per node (first order, float64
// = 8 bytes): a sample shard holds its series (rows × columns) twice
// (values and encoding); ratios one sector's chunks three times (bytes,
// decoded, columns); stitch replicas × (N+1) twice; transform replicas ×
// θ points × 4 curves plus the cos/sin table N × θ points × 2; routes
// replicas × θ points × 4 routes; the exact density all-CPU states ×
// (N+1) per worker; the integer counts states × (2·bonds+1)(N+1) × 2.
func EstimatePlan(p *Plan, c *cache.Cache, jobs int) Estimate {
	st := p.Study
	var e Estimate
	var largest int64
	note := func(n *Node, mem int64, parallel bool) {
		if parallel {
			mem *= int64(jobs)
		}
		if mem > largest {
			largest, e.Largest = mem, n.Name()
		}
	}
	r := int64(st.Stitch.Replicas)
	g := int64(st.Transform.ThetaPoints)
	for _, b := range p.Branches {
		n := int64(b.N)
		// magnetization: uint32 block counts; monomer: float64 per sweep
		shardBytes := int64(st.Sample.ChunkSweeps/max(st.Sample.BlockSweeps, 1))*
			int64(ratio.RawColumns(ratio.ChainOf(st.Sample.Estimator), st.Model.Dimension))*4 + 256
		if b.Branch.Monomer() {
			shardBytes = int64(st.Sample.ChunkSweeps)*int64(stages.Columns(st.Sample.Estimator, st.Model.Dimension))*8 + 256
		}
		for _, s := range b.Samples {
			if c == nil || !c.Listed(s.Key) {
				e.DiskBytes += shardBytes + 128
				note(s, 2*shardBytes, true)
			}
		}
		stale := func(x *Node) bool { return x != nil && (c == nil || !c.Listed(x.Key)) }
		if stale(b.Ratios) {
			// decoded and cooked rows of one sector: float64, ≤ 2W columns;
			// a magnetization row is a block
			rows := int64(st.Chunks()) * int64(st.Sample.ChunkSweeps)
			if !b.Branch.Monomer() {
				rows /= int64(max(st.Sample.BlockSweeps, 1))
			}
			cooked := rows * 8 * int64(stages.Columns(st.Sample.Estimator, st.Model.Dimension))
			note(b.Ratios, 3*cooked, true)
		}
		if stale(b.Stitch) {
			e.DiskBytes += r * (n + 1) * 24
			note(b.Stitch, 2*r*(n+1)*8, true)
		}
		if stale(b.Transform) {
			e.DiskBytes += g * 200
			note(b.Transform, 4*r*g*8+2*(n+1)*g*8, true)
		}
		if stale(b.Routes) {
			note(b.Routes, 4*r*g*8+int64(st.Routes.MaxOrder)*r*8, true)
		}
		if b.Exact != nil {
			for _, in := range b.Exact.Inputs {
				if !stale(in) {
					continue
				}
				l := st.Model.Dimension
				front := int64(1) << uint(sitesOf(l-1, b.Branch.L))
				switch in.Task.Stage {
				case stages.ExactDensityStage:
					note(in, int64(runtime.GOMAXPROCS(0))*front*(n+1)*8, false)
					e.DiskBytes += (n + 1) * 40
				default:
					if st.Model.Dimension == 2 && b.Branch.L <= exact.MaxTorusSize {
						bonds := 2 * n
						note(in, 2*front*(2*bonds+1)*(n+1)*8, false)
					}
					e.DiskBytes += (n + 1) * int64(st.Model.Dimension) * n * 20
				}
			}
		}
	}
	e.MemBytes = baseMemory + largest
	return e
}

// availableMemory returns MemAvailable from /proc/meminfo (0 if unknown).
func availableMemory() int64 {
	f, err := os.Open("/proc/meminfo")
	if err != nil {
		return 0
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		if fields := strings.Fields(sc.Text()); len(fields) >= 2 && fields[0] == "MemAvailable:" {
			kb, _ := strconv.ParseInt(fields[1], 10, 64)
			return kb << 10
		}
	}
	return 0
}

// availableDisk returns the bytes free to this user under dir (0 if unknown).
func availableDisk(dir string) int64 {
	var s syscall.Statfs_t
	if err := syscall.Statfs(dir, &s); err != nil {
		return 0
	}
	return int64(s.Bavail) * int64(s.Bsize)
}

func human(b int64) string {
	switch {
	case b >= 1<<30:
		return fmt.Sprintf("%.1f GiB", float64(b)/(1<<30))
	case b >= 1<<20:
		return fmt.Sprintf("%.1f MiB", float64(b)/(1<<20))
	}
	return fmt.Sprintf("%.0f KiB", float64(b)/(1<<10))
}

// checkResources compares an estimate with this machine: the problems
// (memory or disk beyond what is free) and one summary line.
func checkResources(e Estimate, cacheDir string) (line string, problems []string) {
	mem, disk := availableMemory(), availableDisk(cacheDir)
	line = fmt.Sprintf("estimate: peak memory %s (largest node: %s), new cache data %s", human(e.MemBytes), e.Largest, human(e.DiskBytes))
	if mem > 0 || disk > 0 {
		line += fmt.Sprintf("; free here: memory %s, disk %s", human(mem), human(disk))
	}
	if mem > 0 && e.MemBytes > mem {
		problems = append(problems, fmt.Sprintf("the estimated peak memory %s exceeds the %s available", human(e.MemBytes), human(mem)))
	}
	if disk > 0 && e.DiskBytes > disk {
		problems = append(problems, fmt.Sprintf("the estimated new cache data %s exceeds the %s free in %s", human(e.DiskBytes), human(disk), cacheDir))
	}
	return line, problems
}
