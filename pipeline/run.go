package pipeline

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"runtime"
	"sort"
	"strings"
	"sync"
	"time"

	"strata/cache"
	"strata/stages"
)

// Runner executes a plan's nodes against a cache.
type Runner struct {
	Cache *cache.Cache
	Jobs  int
	Log   io.Writer // progress and warnings; nil discards
	// Live draws a progress line (shards done / total, rate, ETA) that
	// rewrites itself; otherwise one summary line per stage is printed.
	Live bool
	// Only restricts the run to these stages and what they need (nil: all).
	Only map[string]bool
	// Shard, when K > 0, runs only the sample shards assigned to task I.
	ShardI, ShardK int
	// outputHook (tests only) rewrites computed outputs before storing.
	outputHook func(stage string, out []byte) []byte
	// Stop, when closed, ends the run: no node is dispatched after it, and
	// nodes in flight are waited for at most StopGrace before Run returns
	// ErrInterrupted (their results are then abandoned).
	Stop      <-chan struct{}
	StopGrace time.Duration
}

// ErrInterrupted is returned by Run when Stop was closed.
var ErrInterrupted = errors.New("interrupted")

// Select returns the nodes a run must consider, in dependency order.
func (r *Runner) Select(p *Plan) []*Node {
	want := map[*Node]bool{}
	var mark func(n *Node)
	mark = func(n *Node) {
		if want[n] {
			return
		}
		want[n] = true
		for _, in := range n.Inputs {
			mark(in)
		}
	}
	for _, n := range p.Nodes {
		if r.Only == nil || r.Only[n.Task.Stage] {
			mark(n)
		}
	}
	var shardOf map[*Node]int
	if r.ShardK > 0 {
		var samples []*Node
		for _, n := range p.Nodes {
			if n.Task.Stage == "sample" {
				samples = append(samples, n)
			}
		}
		shardOf = ShardOf(samples, r.ShardK)
	}
	var out []*Node
	for _, n := range p.Nodes {
		if !want[n] {
			continue
		}
		if shardOf != nil {
			if t, ok := shardOf[n]; ok && t != r.ShardI {
				continue
			}
		}
		out = append(out, n)
	}
	return out
}

func (r *Runner) logf(format string, args ...any) {
	if r.Log != nil {
		fmt.Fprintf(r.Log, format, args...)
	}
}

// Run executes the selected nodes level by level; nodes of one level run
// concurrently on r.Jobs workers. Outputs depend only on inputs, so the
// results are the same for any number of workers. A node whose inputs
// failed is skipped. The returned error lists every failed node.
func (r *Runner) Run(p *Plan) error {
	nodes := r.Select(p)
	jobs := r.Jobs
	if jobs < 1 {
		jobs = 1
	}
	byLevel := map[int][]*Node{}
	var levels []int
	for _, n := range nodes {
		if _, ok := byLevel[n.level]; !ok {
			levels = append(levels, n.level)
		}
		byLevel[n.level] = append(byLevel[n.level], n)
	}
	sort.Ints(levels)
	var failed []*Node
	for _, lv := range levels {
		group := byLevel[lv]
		if !r.runGroup(group, jobs) {
			return ErrInterrupted
		}
		computed := false
		for _, n := range group {
			if n.Err != nil {
				failed = append(failed, n)
			}
			computed = computed || n.Status == "computed"
		}
		// one fsync per batch: what this group stored is durable before
		// the next group builds on it (objects are written without a
		// per-object fsync and verified on every read)
		if computed {
			if err := r.Cache.Sync(); err != nil {
				r.logf("warning: %v", err)
			}
		}
	}
	if len(failed) > 0 {
		return errors.New(summarizeFailures(failed))
	}
	return nil
}

// summarizeFailures prints one line per cause (the innermost error, so that
// a full disk is one line, not one per node) with the first nodes it hit.
func summarizeFailures(failed []*Node) string {
	type cause struct {
		msg   string
		nodes []string
	}
	var causes []*cause
	byMsg := map[string]*cause{}
	for _, n := range failed {
		msg := rootCause(n.Err)
		if strings.HasPrefix(n.Err.Error(), "skipped: input") {
			msg = "skipped: an input failed"
		}
		c := byMsg[msg]
		if c == nil {
			c = &cause{msg: msg}
			byMsg[msg] = c
			causes = append(causes, c)
		}
		c.nodes = append(c.nodes, n.Name())
	}
	var b strings.Builder
	for i, c := range causes {
		if i > 0 {
			b.WriteByte('\n')
		}
		names := c.nodes
		more := ""
		if len(names) > 3 {
			more = fmt.Sprintf(", … and %d more", len(names)-3)
			names = names[:3]
		}
		fmt.Fprintf(&b, "%d node(s): %s (%s%s)", len(c.nodes), c.msg, strings.Join(names, "; "), more)
	}
	return b.String()
}

// rootCause is the innermost wrapped error's message (for an *os.PathError
// and the like, the reason without the path).
func rootCause(err error) string {
	for {
		u := errors.Unwrap(err)
		if u == nil {
			return err.Error()
		}
		err = u
	}
}

type stageStats struct {
	total, done, computed, cached, failed int
	start                                 time.Time
}

// runGroup runs one level; it returns false when the run was stopped.
func (r *Runner) runGroup(group []*Node, jobs int) bool {
	stats := map[string]*stageStats{}
	var order []string
	for _, n := range group {
		s := stats[n.Task.Stage]
		if s == nil {
			s = &stageStats{start: time.Now()}
			stats[n.Task.Stage] = s
			order = append(order, n.Task.Stage)
		}
		s.total++
	}
	var mu sync.Mutex
	var wg sync.WaitGroup
	work := make(chan *Node)
	for w := 0; w < jobs; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for n := range work {
				r.runNode(n)
				mu.Lock()
				s := stats[n.Task.Stage]
				s.done++
				switch {
				case n.Err != nil:
					s.failed++
				case n.Status == "cached":
					s.cached++
				default:
					s.computed++
				}
				if r.Live {
					el := time.Since(s.start).Seconds()
					rate := float64(s.done) / el
					eta := float64(s.total-s.done) / rate
					r.logf("\r%-10s %d/%d  %.1f/s  ETA %s   ", n.Task.Stage, s.done, s.total, rate, fmtSeconds(eta))
				}
				mu.Unlock()
			}
		}()
	}
	interrupted := false
dispatch:
	for _, n := range group {
		select {
		case work <- n:
		case <-r.Stop: // a nil channel never fires
			interrupted = true
			break dispatch
		}
	}
	close(work)
	finished := make(chan struct{})
	go func() { wg.Wait(); close(finished) }()
	if !interrupted {
		select {
		case <-finished:
		case <-r.Stop:
			interrupted = true
		}
	}
	if interrupted {
		grace := r.StopGrace
		if grace <= 0 {
			grace = 2 * time.Second
		}
		select { // nodes in flight get a moment to land in the cache
		case <-finished:
		case <-time.After(grace):
		}
		return false
	}
	if r.Live {
		r.logf("\r%60s\r", "")
	}
	for _, name := range order {
		s := stats[name]
		line := fmt.Sprintf("%-10s %d nodes: %d computed, %d cached", name, s.total, s.computed, s.cached)
		if s.failed > 0 {
			line += fmt.Sprintf(", %d FAILED", s.failed)
		}
		r.logf("%s (%.1fs)\n", line, time.Since(s.start).Seconds())
	}
	return true
}

func fmtSeconds(s float64) string {
	if s != s || s > 1e7 {
		return "?"
	}
	return (time.Duration(s) * time.Second).String()
}

// runNode computes one node unless its verified output is cached.
func (r *Runner) runNode(n *Node) {
	defer func() {
		// a bug in one stage fails its node (and what depends on it), not
		// the whole run: the other nodes' results still reach the cache
		if p := recover(); p != nil {
			n.Err = fmt.Errorf("internal error (please report): %v", p)
		}
	}()
	for _, in := range n.Inputs {
		if in.Err != nil {
			n.Err = fmt.Errorf("skipped: input %s failed", in.Name())
			return
		}
	}
	_, err := r.Cache.Get(n.Key)
	if err == nil {
		n.Status = "cached"
		return
	}
	if errors.Is(err, cache.ErrCorrupt) {
		r.logf("warning: %s: %v; recomputing\n", n.Name(), err)
	}
	start := time.Now()
	var out []byte
	var cpu0 float64
	var clock string
	if n.Task.Stage == stages.SampleStage {
		// a shard runs on one goroutine: pin it to measure its thread's CPU
		runtime.LockOSThread()
		defer runtime.UnlockOSThread()
		cpu0, clock = threadCPU()
	}
	if n.Task.Lazy != nil {
		// inputs streamed from the cache as the task asks for them
		out, err = n.Task.Lazy(func(i int) ([]byte, error) {
			b, err := r.Cache.Get(n.Inputs[i].Key)
			if err != nil {
				return nil, fmt.Errorf("reading input %s: %v", n.Inputs[i].Name(), err)
			}
			return b, nil
		})
	} else {
		inputs := make([][]byte, len(n.Inputs))
		for i, in := range n.Inputs {
			b, err := r.Cache.Get(in.Key)
			if err != nil {
				n.Err = fmt.Errorf("reading input %s: %v", in.Name(), err)
				return
			}
			inputs[i] = b
		}
		out, err = n.Task.Run(inputs)
	}
	if err != nil {
		n.Err = err
		return
	}
	if r.outputHook != nil {
		out = r.outputHook(n.Task.Stage, out)
	}
	if clock != "" {
		cpu1, _ := threadCPU()
		n.CPUSeconds = cpu1 - cpu0
	}
	if err := r.Cache.Put(n.Key, out); err != nil {
		n.Err = err
		return
	}
	if clock != "" {
		if meta, err := json.Marshal(ShardMeta{CPUSeconds: n.CPUSeconds, Clock: clock}); err == nil {
			_ = r.Cache.PutMeta(n.Key, meta) // provenance only: a failure costs nothing else
		}
	}
	n.Status = "computed"
	n.Seconds = time.Since(start).Seconds()
}
