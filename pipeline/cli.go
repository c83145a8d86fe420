package pipeline

import (
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"math"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"sort"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"text/tabwriter"
	"time"

	"strata/cache"
	"strata/stages"
)

// Exit codes.
const (
	ExitOK    = 0
	ExitFail  = 1
	ExitUsage = 2
)

type env struct {
	stdout, stderr io.Writer
	// outputHook, for tests only, rewrites each computed node's output
	// before it is stored (bias injection); nil in every real run.
	outputHook func(stage string, out []byte) []byte
}

const mainUsage = `strata: density-of-states studies of the Ising model at imaginary field

Usage:
  strata <command> [flags] [arguments]

Commands:
  run     STUDY.toml   run what is stale, reuse what is cached, write the outputs
  plan    STUDY.toml   show which nodes would run and which parameter made each stale
  show    STUDY.toml   print the headline results of a finished run
  check   STUDY.toml   run, then test the study's [[expect]] entries (and a baseline)
  budget  STUDY.toml   predict the sweeps needed to push the reach to a given θ
  slurm   STUDY.toml   run the study on a Slurm cluster (job array over a shared cache)
  exact                print exact references for one lattice
  cache   verify|ls|gc manage the cache

Run 'strata <command> --help' for the flags of a command.
`

// Main runs the command line and returns the exit code.
func Main(args []string, stdout, stderr io.Writer) int {
	e := &env{stdout: stdout, stderr: stderr}
	if len(args) == 0 {
		fmt.Fprint(stderr, mainUsage)
		return ExitUsage
	}
	switch args[0] {
	case "-h", "--help", "help":
		fmt.Fprint(stdout, mainUsage)
		return ExitOK
	case "run":
		return e.studyCommand("run", args[1:])
	case "plan":
		return e.studyCommand("plan", args[1:])
	case "show":
		return e.studyCommand("show", args[1:])
	case "check":
		return e.studyCommand("check", args[1:])
	case "exact":
		return e.exactCommand(args[1:])
	case "budget":
		return e.budgetCommand(args[1:])
	case "slurm":
		return e.slurmCommand(args[1:])
	case "cache":
		return e.cacheCommand(args[1:])
	}
	fmt.Fprintf(stderr, "strata: unknown command %q\n\n%s", args[0], mainUsage)
	return ExitUsage
}

// multi is a repeatable string flag.
type multi []string

func (m *multi) String() string     { return strings.Join(*m, " ") }
func (m *multi) Set(s string) error { *m = append(*m, s); return nil }

// parseInterleaved parses flags that may stand before or after positional
// arguments (the flag package stops at the first positional one).
func parseInterleaved(fs *flag.FlagSet, args []string) ([]string, error) {
	var pos []string
	for {
		if err := fs.Parse(args); err != nil {
			return nil, err
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return pos, nil
		}
		pos = append(pos, rest[0])
		args = rest[1:]
	}
}

type studyFlags struct {
	cacheDir, outDir string
	sets             multi
	jobs             int
	stages           string
	explain          bool
	shard            string
	baseline, junit  string
	sigma            float64
	refresh, force   bool
}

func (e *env) newFlagSet(name, usage string) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(e.stderr)
	fs.Usage = func() {
		fmt.Fprint(fs.Output(), usage)
		fs.PrintDefaults()
		fmt.Fprintln(fs.Output(), "\nA flag given twice takes its last value (--set accumulates).")
	}
	return fs
}

// writable checks that files can be created in dir (creating dir), by
// writing and removing a probe file: a read-only cache or an output folder
// under a file fails here, before any work.
func writable(dir string) error {
	if err := os.MkdirAll(dir, 0o777); err != nil {
		return err
	}
	f, err := os.CreateTemp(dir, ".strata-probe-*")
	if err != nil {
		return err
	}
	name := f.Name()
	f.Close()
	return os.Remove(name)
}

// register adds the flags every study command accepts.
func (f *studyFlags) register(fs *flag.FlagSet) {
	fs.StringVar(&f.cacheDir, "cache", "", "cache directory (default .strata-cache beside the study, or $STRATA_CACHE)")
	fs.StringVar(&f.outDir, "out", "", "output directory (default out/<name>)")
	fs.Var(&f.sets, "set", "override a study key: dotted.key=value in TOML syntax (repeatable)")
	fs.IntVar(&f.jobs, "jobs", runtime.NumCPU(), "number of concurrent workers")
}

// parse parses interleaved flags; done reports that the command should
// return code at once (help was printed, or the flags were bad).
func (e *env) parse(fs *flag.FlagSet, args []string) (pos []string, code int, done bool) {
	fs.SetOutput(io.Discard) // the flag package would print the usage on every error
	pos, err := parseInterleaved(fs, args)
	if errors.Is(err, flag.ErrHelp) {
		fs.SetOutput(e.stdout)
		fs.Usage()
		return nil, ExitOK, true
	}
	if err != nil {
		fmt.Fprintf(e.stderr, "strata %s: %v (see 'strata %s --help')\n", fs.Name(), err, fs.Name())
		return nil, ExitUsage, true
	}
	return pos, 0, false
}

// loadStudy loads the one study named in pos with the flags' overrides
// and fills in the default cache and output folders.
func (e *env) loadStudy(cmd string, pos []string, f *studyFlags) (*Study, int, bool) {
	if len(pos) != 1 {
		fmt.Fprintf(e.stderr, "strata %s: want exactly one study file, got %d arguments\n", cmd, len(pos))
		return nil, ExitUsage, false
	}
	st, err := LoadStudy(pos[0], f.sets)
	if err != nil {
		fmt.Fprintln(e.stderr, err)
		return nil, ExitUsage, false
	}
	if f.cacheDir == "" {
		f.cacheDir = DefaultCacheDir(pos[0])
	}
	if f.outDir == "" {
		f.outDir = DefaultOutDir(st)
	}
	return st, 0, true
}

var studyUsages = map[string]string{
	"run":  "Usage: strata run STUDY.toml [flags]\n\nRuns every stale node of the study (reusing cached ones) and writes the output folder.\n\nFlags:\n",
	"plan": "Usage: strata plan STUDY.toml [flags]\n\nDry run: lists the nodes a run would compute and, for each, which parameter made it stale.\n\nFlags:\n",
	"show": "Usage: strata show STUDY.toml [flags]\n\nPrints the headline results (first zeros, reach, scaling) from the cache.\n\nFlags:\n",
	"check": "Usage: strata check STUDY.toml [--baseline summary.json] [--sigma 3] [--junit report.xml] [flags]\n\n" +
		"Runs the study like 'run', then evaluates its [[expect]] entries and, with --baseline, compares every\n" +
		"headline number with a stored summary.json. Exit 0 when all hold, 1 when any fails, 2 on bad usage\nor a bad expectation.\n\n" +
		"With --refresh-baseline the run's summary replaces the --baseline file instead, provided every\n" +
		"[[expect]] entry holds and the study's git checkout has no uncommitted changes under stages/ or\n" +
		"pipeline/ (so a baseline never silently follows a bug).\n\nFlags:\n",
}

func (e *env) studyCommand(cmd string, args []string) int {
	fs := e.newFlagSet(cmd, studyUsages[cmd])
	var f studyFlags
	f.register(fs)
	if cmd == "check" {
		fs.StringVar(&f.baseline, "baseline", "", "compare with this stored summary.json")
		fs.Float64Var(&f.sigma, "sigma", 3, "baseline tolerance in combined standard errors")
		fs.StringVar(&f.junit, "junit", "", "also write the outcomes as JUnit XML to this file")
		fs.BoolVar(&f.refresh, "refresh-baseline", false, "write this run's summary to the --baseline file instead of comparing (refused while stages/ or pipeline/ have uncommitted changes)")
		fs.BoolVar(&f.force, "force", false, "with --refresh-baseline: write even outside a git checkout or with uncommitted changes")
	}
	if cmd == "run" || cmd == "plan" {
		fs.StringVar(&f.stages, "stages", "", "comma-separated stages to run, with what they need (sample,ratios,stitch,exact,exact_density,fit,transform,routes,scaling)")
		fs.StringVar(&f.shard, "shard", "", "i/K: run only the sample shards assigned to task i of K (with --stages sample)")
	}
	if cmd == "plan" {
		fs.BoolVar(&f.explain, "explain", false, "print the full record behind each node's key")
	}
	pos, code, done := e.parse(fs, args)
	if done {
		return code
	}
	if f.jobs < 1 {
		fmt.Fprintf(e.stderr, "strata %s: --jobs %d: must be ≥ 1\n", cmd, f.jobs)
		return ExitUsage
	}
	if f.shard != "" && f.stages != stages.SampleStage {
		fmt.Fprintf(e.stderr, "strata %s: --shard runs sample shards only: give --stages sample (got %q)\n", cmd, f.stages)
		return ExitUsage
	}
	st, code, ok := e.loadStudy(cmd, pos, &f)
	if !ok {
		return code
	}
	path := pos[0]
	if cmd == "run" || cmd == "check" {
		if err := writable(f.cacheDir); err != nil {
			fmt.Fprintf(e.stderr, "strata %s: the cache %s is not writable: %v\n", cmd, f.cacheDir, err)
			return ExitUsage
		}
		if f.shard == "" {
			if err := writable(filepath.Dir(filepath.Clean(f.outDir))); err != nil {
				fmt.Fprintf(e.stderr, "strata %s: cannot write the outputs under %s: %v\n", cmd, f.outDir, err)
				return ExitUsage
			}
			if fi, err := os.Stat(f.outDir); err == nil && !fi.IsDir() {
				fmt.Fprintf(e.stderr, "strata %s: --out %s is a file, not a folder\n", cmd, f.outDir)
				return ExitUsage
			}
		}
	}
	if f.refresh {
		if f.baseline == "" {
			fmt.Fprintln(e.stderr, "strata check: --refresh-baseline needs --baseline FILE")
			return ExitUsage
		}
		if why := baselineRefusal(path); why != "" {
			if !f.force {
				fmt.Fprintf(e.stderr, "strata check: refusing to refresh %s: %s (--force overrides)\n", f.baseline, why)
				return ExitUsage
			}
			fmt.Fprintf(e.stderr, "strata check: warning: refreshing %s although %s (--force)\n", f.baseline, why)
		}
	}
	c, err := cache.Open(f.cacheDir)
	if err != nil {
		fmt.Fprintln(e.stderr, err)
		return ExitFail
	}
	plan := BuildPlan(st)
	if cmd == "check" {
		if err := checkExpectTargets(st, plan); err != nil {
			fmt.Fprintf(e.stderr, "strata check: bad expectation: %v\n", err)
			return ExitUsage
		}
	}
	if cmd == "run" || cmd == "check" {
		lease, err := c.Acquire()
		if err != nil {
			fmt.Fprintf(e.stderr, "strata %s: cannot hold a lease in the cache: %v\n", cmd, err)
			return ExitFail
		}
		defer lease.Release()
	}
	runner := &Runner{Cache: c, Jobs: f.jobs, Log: e.stderr, Live: isTerminal(e.stderr), outputHook: e.outputHook}
	if f.stages != "" {
		runner.Only = map[string]bool{}
		valid := map[string]bool{stages.SampleStage: true, stages.RatiosStage: true, stages.StitchStage: true,
			stages.ExactStage: true, stages.ExactDensityStage: true, stages.TransformStage: true, stages.ScalingStage: true, stages.FitStage: true, stages.RoutesStage: true}
		for _, s := range strings.Split(f.stages, ",") {
			s = strings.TrimSpace(s)
			if !valid[s] {
				fmt.Fprintf(e.stderr, "strata %s: --stages: unknown stage %q\n", cmd, s)
				return ExitUsage
			}
			runner.Only[s] = true
		}
	}
	if f.shard != "" {
		i, k, err := parseShard(f.shard)
		if err != nil {
			fmt.Fprintf(e.stderr, "strata %s: --shard: %v\n", cmd, err)
			return ExitUsage
		}
		runner.ShardI, runner.ShardK = i, k
		// fault injection for the cluster tests: this task fails at once
		if os.Getenv("STRATA_FAIL_SHARD") == strconv.Itoa(i) {
			fmt.Fprintf(e.stderr, "strata %s: shard %d/%d: failure injected by STRATA_FAIL_SHARD\n", cmd, i, k)
			return ExitFail
		}
	}
	switch cmd {
	case "plan":
		return e.plan(plan, runner, f)
	case "show":
		return e.show(plan, c)
	}
	if line, problems := checkResources(EstimatePlan(plan, c, f.jobs), c.Dir()); len(problems) > 0 {
		fmt.Fprintf(e.stderr, "strata %s: %s\n", cmd, line)
		for _, pr := range problems {
			fmt.Fprintf(e.stderr, "strata %s: %s; lower sweeps, replicas or --jobs, or run on a larger machine\n", cmd, pr)
		}
		return ExitUsage
	}
	start := time.Now()
	caught, release := e.catchSignals(runner)
	runErr := runner.Run(plan)
	release()
	ran := runner.Select(plan)
	if errors.Is(runErr, ErrInterrupted) {
		return e.interrupted(cmd, caught(), c, ran)
	}
	if f.shard != "" {
		// array tasks write only to the cache
		if runErr != nil {
			fmt.Fprintf(e.stderr, "strata run: failed:\n%v\n", runErr)
			return ExitFail
		}
		return ExitOK
	}
	text, _ := os.ReadFile(path)
	studyText := string(text)
	for _, s := range f.sets {
		studyText += "\n# --set " + s
	}
	res, reportPath, err := Materialize(c, plan, ran, f.outDir, studyText)
	if err != nil {
		if runErr != nil {
			fmt.Fprintf(e.stderr, "strata %s: failed:\n%v\n", cmd, runErr)
		}
		fmt.Fprintf(e.stderr, "strata %s: writing outputs: %v\n", cmd, err)
		return ExitFail
	}
	if runErr != nil {
		fmt.Fprintf(e.stderr, "strata %s: failed:\n%v\n", cmd, runErr)
		return ExitFail
	}
	if cmd == "check" && f.refresh {
		return e.refreshBaseline(st, res, f.baseline)
	}
	if cmd == "check" {
		return e.check(st, res, f.baseline, f.junit, f.sigma)
	}
	fmt.Fprintf(e.stderr, "done in %.1fs; outputs in %s; report: %s\n", time.Since(start).Seconds(), f.outDir, reportPath)
	return ExitOK
}

// catchSignals makes SIGINT and SIGTERM stop the runner instead of killing
// the process; after the first signal the default action is restored (a
// second Ctrl-C kills at once). caught reports the signal; release undoes
// the handler.
func (e *env) catchSignals(r *Runner) (caught func() os.Signal, release func()) {
	sigs := make(chan os.Signal, 1)
	signal.Notify(sigs, os.Interrupt, syscall.SIGTERM)
	stop, done := make(chan struct{}), make(chan struct{})
	var got atomic.Value
	go func() {
		select {
		case s := <-sigs:
			signal.Stop(sigs)
			got.Store(s)
			close(stop)
		case <-done:
		}
	}()
	r.Stop = stop
	caught = func() os.Signal {
		s, _ := got.Load().(os.Signal)
		return s
	}
	release = func() {
		signal.Stop(sigs)
		close(done)
	}
	return caught, release
}

// interrupted reports an interrupted run, removes this process's temp
// files from the cache and returns 130 (SIGINT) or 143 (SIGTERM), as a
// shell does for a process killed by that signal. The output folder is left
// as the previous complete run wrote it.
func (e *env) interrupted(cmd string, sig os.Signal, c *cache.Cache, ran []*Node) int {
	saved, total := 0, 0
	for _, n := range ran {
		if n.Task.Stage == stages.SampleStage {
			total++
			if c.Has(n.Key) {
				saved++
			}
		}
	}
	c.RemoveTemps(os.Getpid())
	name, code := "SIGINT", 130
	if sig == syscall.SIGTERM {
		name, code = "SIGTERM", 143
	}
	fmt.Fprintf(e.stderr, "strata %s: interrupted by %s: %d of %d sample shards are saved in the cache; rerun the same command to resume\n",
		cmd, name, saved, total)
	return code
}

func parseShard(s string) (int, int, error) {
	a, b, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(a)
	k, err2 := strconv.Atoi(b)
	if !ok || err1 != nil || err2 != nil || k < 1 || i < 0 || i >= k {
		return 0, 0, fmt.Errorf("%q: want i/K with 0 ≤ i < K", s)
	}
	return i, k, nil
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// plan prints which selected nodes are stale and why, by comparing each
// node's record with the one stored in the previous manifest.
func (e *env) plan(p *Plan, r *Runner, f studyFlags) int {
	prev := map[string]string{}
	if b, err := os.ReadFile(filepath.Join(f.outDir, "manifest.json")); err == nil {
		var m Manifest
		if json.Unmarshal(b, &m) == nil {
			for _, n := range m.Nodes {
				prev[n.Stage+"|"+n.Branch+"|"+n.Label] = n.Record
			}
		}
	}
	stale := 0
	nodes := r.Select(p)
	for _, n := range nodes {
		_, err := r.Cache.Get(n.Key)
		state := "cached"
		if err != nil {
			state = "run"
			stale++
		}
		fmt.Fprintf(e.stdout, "%-6s %s  %s\n", state, n.Key.Short(), n.Name())
		if state == "run" {
			if old, ok := prev[n.Task.Stage+"|"+n.Branch+"|"+n.Label]; ok {
				for _, why := range recordDiff(old, n.Record) {
					fmt.Fprintf(e.stdout, "         %s\n", why)
				}
			} else if errors.Is(err, cache.ErrCorrupt) {
				fmt.Fprintf(e.stdout, "         cached object is corrupt\n")
			} else {
				fmt.Fprintf(e.stdout, "         not in the cache\n")
			}
		}
		if f.explain {
			for _, line := range strings.Split(strings.TrimSpace(n.Record), "\n") {
				fmt.Fprintf(e.stdout, "         | %s\n", line)
			}
		}
	}
	fmt.Fprintf(e.stdout, "%d of %d nodes would run\n", stale, len(nodes))
	// a login node plans for a cluster: beyond this machine is a warning
	line, problems := checkResources(EstimatePlan(p, r.Cache, r.Jobs), r.Cache.Dir())
	fmt.Fprintln(e.stdout, line)
	for _, pr := range problems {
		fmt.Fprintf(e.stderr, "strata plan: warning: %s on this machine\n", pr)
	}
	return ExitOK
}

// recordDiff explains the difference between two records: changed
// parameters by name, a changed version, or changed inputs.
func recordDiff(old, cur string) []string {
	parse := func(s string) (map[string]string, int) {
		m := map[string]string{}
		inputs := 0
		for _, line := range strings.Split(s, "\n") {
			f := strings.SplitN(line, " ", 3)
			switch {
			case len(f) == 3 && f[0] == "param":
				m["param "+f[1]] = f[2]
			case len(f) >= 2 && f[0] == "version":
				m["version"] = f[1]
			case len(f) >= 2 && f[0] == "input":
				m[fmt.Sprintf("input %d", inputs)] = f[1]
				inputs++
			}
		}
		return m, inputs
	}
	a, na := parse(old)
	b, nb := parse(cur)
	var out []string
	inputsChanged := na != nb
	keys := map[string]bool{}
	for k := range a {
		keys[k] = true
	}
	for k := range b {
		keys[k] = true
	}
	var sorted []string
	for k := range keys {
		sorted = append(sorted, k)
	}
	sort.Strings(sorted)
	for _, k := range sorted {
		if a[k] == b[k] {
			continue
		}
		if strings.HasPrefix(k, "input") {
			inputsChanged = true
			continue
		}
		out = append(out, fmt.Sprintf("%s: %s → %s", k, orNone(a[k]), orNone(b[k])))
	}
	if inputsChanged {
		out = append(out, "inputs changed (an upstream node is stale)")
	}
	if len(out) == 0 {
		out = append(out, "same record as the last run, but not in this cache")
	}
	return out
}

func orNone(s string) string {
	if s == "" {
		return "(none)"
	}
	return s
}

// showRoutes prints one branch's routes from ρ to the first zero, with the
// exact zero beside them.
func (e *env) showRoutes(b BranchSummary) {
	ex := "none"
	if b.ExactFirstZero != nil {
		ex = fmt.Sprintf("%.6g", *b.ExactFirstZero)
	}
	fmt.Fprintf(e.stdout, "\nroutes of %s (exact first zero %s):\n", b.Dir, ex)
	tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "  route\tfirst zero\torder\ttruncation\tRe h0\tbias onset (MC, exact)")
	for _, r := range b.Routes {
		fz := "none"
		if r.FirstZero != nil {
			fz = nf(r.FirstZero.Value, "%.6g")
			if !math.IsNaN(float64(r.FirstZero.Error)) {
				fz += " ± " + nf(r.FirstZero.Error, "%.2g")
			}
		}
		order := "—"
		if r.Order > 0 {
			order = strconv.Itoa(r.Order)
		}
		fmt.Fprintf(tw, "  %s\t%s\t%s\t%s\t%s\t%s, %s\n", r.Route, fz, order, nf(r.Truncation, "%.2g"), nf(r.ReH, "%.2g"),
			nf(r.BiasOnset, "%.4g"), nf(r.BiasOnsetExact, "%.4g"))
	}
	tw.Flush()
}

func (e *env) show(p *Plan, c *cache.Cache) int {
	res := LoadResults(c, p)
	s := res.BuildSummary()
	tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "branch\tL\tbeta\tfirst zero\texact\treach\treach below zero")
	missing := 0
	for _, b := range s.Branches {
		fz := "—"
		if b.FirstZero != nil {
			fz = fmt.Sprintf("%.6g ± %.2g", b.FirstZero.Value, b.FirstZero.Error)
			if b.FirstZero.Marginal {
				fz += " (marginal)"
			}
		}
		ex := "—"
		if b.ExactFirstZero != nil {
			ex = fmt.Sprintf("%.6g", *b.ExactFirstZero)
		}
		reach := "not run"
		if b.Reach != nil {
			reach = fmt.Sprintf("%.4g", *b.Reach)
			if b.ReachIsLowerBound {
				reach = "≥ " + reach
			}
		} else {
			missing++
		}
		below := "—"
		if b.ReachBelowZero != nil {
			below = fmt.Sprintf("%.4g", *b.ReachBelowZero)
		}
		fmt.Fprintf(tw, "%s\t%d\t%s\t%s\t%s\t%s\t%s\n", b.Dir, b.Size, stages.F(b.Beta), fz, ex, reach, below)
	}
	tw.Flush()
	for _, b := range s.Branches {
		if len(b.Routes) > 0 {
			e.showRoutes(b)
		}
	}
	for _, sc := range s.Scaling {
		tag := stages.F(sc.Beta) + sectorsSuffix(sc.Sectors)
		if sc.ThetaC == nil {
			fmt.Fprintf(e.stdout, "scaling beta=%s: %s\n", tag, sc.Note)
			continue
		}
		fmt.Fprintf(e.stdout, "scaling beta=%s: theta_c = %.6g ± %.2g, y = %.4g ± %.2g, sizes %v",
			tag, sc.ThetaC.Value, sc.ThetaC.Error, sc.Exponent.Value, sc.Exponent.Error, sc.Sizes)
		if sc.ExactThetaC != nil {
			fmt.Fprintf(e.stdout, " (exact theta_c %.6g)", *sc.ExactThetaC)
		}
		fmt.Fprintln(e.stdout)
	}
	if len(s.Comparison) > 0 {
		fmt.Fprintln(e.stdout, "\nrepresentations compared (σ·√cpu: the sign's error at the common θ times √(CPU seconds); lower wins):")
		tw := tabwriter.NewWriter(e.stdout, 2, 4, 2, ' ', 0)
		fmt.Fprintln(tw, "  L\tbeta\ttheta\tsectors\tfirst zero\treach\tcpu s\tσ_sign\tσ·√cpu")
		for _, row := range comparisonRows(s.Comparison) {
			fmt.Fprintln(tw, "  "+strings.Join(row, "\t"))
		}
		tw.Flush()
	}
	if missing > 0 {
		fmt.Fprintf(e.stderr, "%d branches have no results yet; run 'strata run' first\n", missing)
	}
	return ExitOK
}

// comparisonRows formats the comparison list, one row per representation:
// L, β, θ, sectors, first zero, reach, cpu seconds, σ_sign, σ·√cpu.
func comparisonRows(cs []Comparison) [][]string {
	opt := func(p *float64, format string) string {
		if p == nil {
			return "—"
		}
		return fmt.Sprintf(format, *p)
	}
	var out [][]string
	for _, c := range cs {
		for i, side := range []ComparisonSide{c.Magnetization, c.Monomer} {
			name := stages.Magnetization
			if i == 1 {
				name = stages.Monomer
			}
			fz := "—"
			if side.FirstZero != nil {
				fz = fmt.Sprintf("%.6g ± %.2g", side.FirstZero.Value, side.FirstZero.Error)
			}
			out = append(out, []string{strconv.Itoa(c.Size), stages.F(c.Beta), opt(c.Theta, "%.4g"), name, fz,
				opt(side.Reach, "%.4g"), opt(side.CPUSeconds, "%.3g"), opt(side.SignErr, "%.3g"), opt(side.SigmaSignSqrtCPU, "%.3g")})
		}
	}
	return out
}

const cacheUsage = `Usage:
  strata cache verify [--cache DIR]            re-hash every object; exit 1 if any is damaged
  strata cache ls [--cache DIR]                list objects with sizes and ages
  strata cache gc STUDY.toml... [--cache DIR] [--older-than 30d]
                                               keep what the studies reach, remove the rest

gc never removes anything younger than 24h (--older-than can only raise
that), nor anything newer than the start of a run in progress: every run
holds a lease file in <cache>/leases, refreshed every 30 s and dead after
10 min without refresh, so this holds on a file system shared by cluster
nodes. Temp files are removed once older than the floor or once their
writer's lease is dead.
`

func (e *env) cacheCommand(args []string) int {
	if len(args) == 0 {
		fmt.Fprint(e.stderr, cacheUsage)
		return ExitUsage
	}
	sub := args[0]
	if sub == "-h" || sub == "--help" {
		fmt.Fprint(e.stdout, cacheUsage)
		return ExitOK
	}
	fs := e.newFlagSet("cache "+sub, cacheUsage+"\nFlags:\n")
	dir := fs.String("cache", "", "cache directory (default .strata-cache, or beside the first study, or $STRATA_CACHE)")
	older := fs.String("older-than", "24h", "gc: remove unreached entries and objects only if unused for this long (e.g. 30d); never below the 24h floor")
	var sets multi
	fs.Var(&sets, "set", "gc: override a study key when resolving the studies (repeatable)")
	pos, code, done := e.parse(fs, args[1:])
	if done {
		return code
	}
	if *dir == "" {
		if len(pos) > 0 {
			*dir = DefaultCacheDir(pos[0])
		} else if d := os.Getenv("STRATA_CACHE"); d != "" {
			*dir = d
		} else {
			*dir = ".strata-cache"
		}
	}
	c, err := cache.Open(*dir)
	if err != nil {
		fmt.Fprintln(e.stderr, err)
		return ExitFail
	}
	switch sub {
	case "verify", "ls":
		es, err := c.List(sub == "verify")
		if err != nil {
			fmt.Fprintln(e.stderr, err)
			return ExitFail
		}
		bad := 0
		var total int64
		now := time.Now()
		for _, en := range es {
			total += en.Size
			if sub == "ls" {
				fmt.Fprintf(e.stdout, "%s  %10d  %s\n", en.Action, en.Size, fmtAge(now.Sub(en.LastUse)))
			} else if en.Err != nil {
				bad++
				fmt.Fprintf(e.stdout, "DAMAGED %s: %v\n", en.Action, en.Err)
			}
		}
		fmt.Fprintf(e.stdout, "%d objects, %d bytes", len(es), total)
		if sub == "verify" {
			fmt.Fprintf(e.stdout, ", %d damaged", bad)
		}
		fmt.Fprintln(e.stdout)
		if bad > 0 {
			return ExitFail
		}
		return ExitOK
	case "gc":
		if len(pos) == 0 {
			fmt.Fprintln(e.stderr, "strata cache gc: name the studies whose objects to keep")
			return ExitUsage
		}
		age, err := parseAge(*older)
		if err != nil {
			fmt.Fprintf(e.stderr, "strata cache gc: --older-than: %v\n", err)
			return ExitUsage
		}
		if age < cache.AgeFloor {
			fmt.Fprintf(e.stderr, "strata cache gc: --older-than %s is below the floor of %s, which protects work in progress (it can only be raised)\n", *older, cache.AgeFloor)
			return ExitUsage
		}
		keep := map[cache.Key]bool{}
		for _, path := range pos {
			st, err := LoadStudy(path, sets)
			if err != nil {
				fmt.Fprintln(e.stderr, err)
				return ExitUsage
			}
			for _, n := range BuildPlan(st).Nodes {
				keep[n.Key] = true
			}
		}
		stats, err := c.GC(keep, age)
		if err != nil {
			fmt.Fprintln(e.stderr, err)
			return ExitFail
		}
		fmt.Fprintf(e.stdout, "removed %d entries and %d objects (%d bytes)\n", stats.Actions, stats.Outputs, stats.Bytes)
		return ExitOK
	}
	fmt.Fprintf(e.stderr, "strata cache: unknown subcommand %q\n\n%s", sub, cacheUsage)
	return ExitUsage
}

func fmtAge(d time.Duration) string {
	switch {
	case d < time.Minute:
		return fmt.Sprintf("%ds", int(d.Seconds()))
	case d < time.Hour:
		return fmt.Sprintf("%dm", int(d.Minutes()))
	case d < 48*time.Hour:
		return fmt.Sprintf("%dh", int(d.Hours()))
	}
	return fmt.Sprintf("%dd", int(d.Hours()/24))
}

// parseAge accepts Go durations and a day suffix (30d).
func parseAge(s string) (time.Duration, error) {
	if strings.HasSuffix(s, "d") {
		n, err := strconv.ParseFloat(strings.TrimSuffix(s, "d"), 64)
		if err != nil || n < 0 {
			return 0, fmt.Errorf("%q is not a duration", s)
		}
		return time.Duration(n * 24 * float64(time.Hour)), nil
	}
	d, err := time.ParseDuration(s)
	if err != nil || d < 0 {
		return 0, fmt.Errorf("%q is not a duration", s)
	}
	return d, nil
}
