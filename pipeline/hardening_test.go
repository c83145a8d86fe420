package pipeline

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"

	"strata/stages"
)

func stagesTask(stage string) stages.Task { return stages.Task{Stage: stage} }

// Bad input is refused at load, by every command (plan included), with the
// file, the key and the reason, and before any work (exit 2).
func TestBadInputRefusedUpFront(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	cases := []struct {
		set  string
		want string // key named in the message
	}{
		{"ratios.min_tau_ratio=nan", "ratios.min_tau_ratio"},
		{"ratios.warn_tau_ratio=inf", "ratios.warn_tau_ratio"},
		{"transform.reach_factor=nan", "transform.reach_factor"},
		{"scaling.exponent=inf", "scaling.exponent"},
		{"sample.sweeps=9223372036854775807", "sample.sweeps"},
		{"sample.sweeps=1000000000000", "sample.sweeps"}, // 10^9 chunks per sector: too many shards
		{"stitch.replicas=1000000000", "stitch.replicas"},
		{"stitch.replicas=90000", "stitch.replicas"}, // × 41 θ points is fine, × 1000001 not
		{"name=\"a\\u0007b\"", "name"},
		{"name=\"" + strings.Repeat("x", 200) + "\"", "name"},
		{"fit.enabled=true", "fit.degrees"}, // default degree 8 has more coefficients than the 4 points of L = 6
	}
	for _, c := range cases {
		args := []string{"plan", study, "--set", c.set}
		if c.set == "stitch.replicas=90000" {
			args = append(args, "--set", "transform.theta_points=1000001")
		}
		start := time.Now()
		code, _, stderr := runCLI(t, args...)
		if code != ExitUsage || !strings.Contains(stderr, c.want) || !strings.Contains(stderr, "tiny.toml") {
			t.Errorf("--set %s: exit %d, %q (want exit 2 naming %s)", c.set, code, stderr, c.want)
		}
		if d := time.Since(start); d > 5*time.Second {
			t.Errorf("--set %s: refused only after %v", c.set, d)
		}
	}
	// every type error at once
	bad := writeStudy(t, dir, "bad.toml", "name = 5\n[model]\ndimension = \"two\"\nsizes = [4]\nbetas = 0.3\n[sample]\nsweeps = \"many\"\n")
	code, _, stderr := runCLI(t, "plan", bad)
	for _, k := range []string{"name", "model.dimension", "model.betas", "sample.sweeps"} {
		if code != ExitUsage || !strings.Contains(stderr, "bad.toml: "+k+": wrong type") {
			t.Errorf("type error of %s not reported: %q", k, stderr)
		}
	}
}

// Command-line mistakes fail before any work with exit 2.
func TestBadFlagsRefused(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy+"\n[[expect]]\nbranch = \"L99_beta0.4\"\nquantity = \"first_zero\"\nexact = true\nsigma = 3\n")
	file := filepath.Join(dir, "afile")
	if err := os.WriteFile(file, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	cache := filepath.Join(dir, "cache")
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"run", study, "--jobs", "0"}, "--jobs"},
		{[]string{"run", study, "--jobs", "-1"}, "--jobs"},
		{[]string{"run", study, "--shard", "0/2"}, "--stages sample"},
		{[]string{"run", study, "--out", filepath.Join(file, "out")}, "cannot write the outputs"},
		{[]string{"run", study, "--out", file}, "is a file"},
		{[]string{"run", study, "--cache", filepath.Join(file, "c")}, "not writable"},
		{[]string{"check", study}, "no branch \"L99_beta0.4\""},
		{[]string{"exact", "--dimension", "2", "--size", "4", "--beta", "0.3", "--max-bits", "1"}, "--max-bits"},
		{[]string{"exact", "--dimension", "1", "--size", "8", "--beta", "0.3", "--theta-points", "1000000000"}, "theta-points"},
	} {
		args := c.args
		if c.args[0] != "exact" && !strings.Contains(strings.Join(c.args, " "), "--cache") {
			args = append(args, "--cache", cache)
		}
		if c.args[0] != "exact" && !strings.Contains(strings.Join(c.args, " "), "--out") {
			args = append(args, "--out", filepath.Join(dir, "out"))
		}
		code, _, stderr := runCLI(t, args...)
		if code != ExitUsage || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, %q (want 2 and %q)", c.args, code, stderr, c.want)
		}
	}
	if entries, _ := os.ReadDir(cache); len(entries) > 0 {
		t.Errorf("refused commands left %d entries in the cache", len(entries))
	}
	_, stdout, _ := runCLI(t, "run", "--help")
	if !strings.Contains(stdout, "A flag given twice takes its last value") {
		t.Error("--help does not state the rule for a flag given twice")
	}
}

// `--stages sample,ratios` writes ratios.csv for what it computed.
func TestPartialStagesWriteOutputs(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "run", study, "--stages", "sample,ratios", "--out", out); code != 0 {
		t.Fatal(e)
	}
	b, err := os.ReadFile(filepath.Join(out, "L6_beta0.4", "ratios.csv"))
	if err != nil || !strings.HasPrefix(string(b), "M,ln_ratio,ln_ratio_err,tau_int\n6,") {
		t.Errorf("ratios.csv after --stages sample,ratios: %v %.80q", err, b)
	}
}

// strata exact computes the ring at any β (no overflow of e^{2β}) and a
// large ring in O(1) per θ, and refuses what it cannot compute.
func TestExactCommandExtremes(t *testing.T) {
	code, stdout, stderr := runCLI(t, "exact", "--dimension", "1", "--size", "64", "--beta", "400", "--theta-points", "3", "--theta-max", "0.1")
	if code != 0 || strings.Contains(stdout, "nan") || !strings.Contains(stdout, "\n0,1,0\n") {
		t.Errorf("β = 400: exit %d\n%s%s", code, stdout, stderr)
	}
	start := time.Now()
	code, stdout, _ = runCLI(t, "exact", "--dimension", "1", "--size", "200000", "--beta", "0.5", "--theta-points", "101")
	if code != 0 || strings.Contains(stdout, ",nan") || !strings.Contains(stdout, "no ρ(M) table") {
		t.Errorf("N = 200000: exit %d\n%.400s", code, stdout)
	}
	if d := time.Since(start); d > 5*time.Second {
		t.Errorf("N = 200000 took %v: the closed forms should cost O(1) per θ", d)
	}
}

// Many nodes failing for one reason (a full disk) give one line, naming
// the first nodes; a second cause gets its own line.
func TestFailuresSummarizedByCause(t *testing.T) {
	var nodes []*Node
	for i := 0; i < 265; i++ {
		n := &Node{Task: stagesTask("sample"), Branch: "L8_beta0.3", Label: fmt.Sprintf("M=%d", i)}
		n.Err = fmt.Errorf("cache: %w", &os.PathError{Op: "write", Path: fmt.Sprintf("/c/%02x/obj%d", i, i), Err: syscall.ENOSPC})
		nodes = append(nodes, n)
	}
	skipped := &Node{Task: stagesTask("ratios"), Branch: "L8_beta0.3", Err: errors.New("skipped: input sample L8_beta0.3 M=0 failed")}
	msg := summarizeFailures(append(nodes, skipped))
	lines := strings.Split(msg, "\n")
	if len(lines) != 2 || !strings.Contains(lines[0], "265 node(s): no space left on device") ||
		!strings.Contains(lines[0], "sample L8_beta0.3 M=0") || !strings.Contains(lines[0], "and 262 more") ||
		!strings.Contains(lines[1], "1 node(s): skipped") {
		t.Errorf("summary:\n%s", msg)
	}
}

// gc in a loop during a run, naming another study: the run succeeds, the
// cache verifies clean, and everything the run wrote is still there.
func TestGCDuringRun(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	other := writeStudy(t, dir, "other.toml", strings.Replace(tinyStudy, "seed = 7", "seed = 8", 1))
	cacheDir := filepath.Join(dir, "cache")
	done := make(chan struct{})
	gcRuns := make(chan int)
	go func() {
		n := 0
		for {
			select {
			case <-done:
				gcRuns <- n
				return
			default:
			}
			if code, _, e := runCLI(t, "cache", "gc", other, "--cache", cacheDir); code != 0 {
				t.Errorf("gc: %s", e)
			}
			n++
		}
	}()
	code, _, stderr := runCLI(t, "run", study, "--cache", cacheDir, "--out", filepath.Join(dir, "out"), "--jobs", "2")
	close(done)
	if n := <-gcRuns; n < 3 {
		t.Logf("only %d gc passes overlapped the run", n)
	}
	if code != 0 {
		t.Fatalf("run during gc: exit %d: %s", code, stderr)
	}
	if code, out, _ := runCLI(t, "cache", "verify", "--cache", cacheDir); code != 0 || !strings.Contains(out, ", 0 damaged") {
		t.Errorf("verify after gc: %s", out)
	}
	if code, _, e := runCLI(t, "run", study, "--cache", cacheDir, "--out", filepath.Join(dir, "out")); code != 0 {
		t.Fatal(e)
	}
	if st := statusByStage(readManifest(t, filepath.Join(dir, "out"))); st["sample"]["computed"] != 0 {
		t.Errorf("gc removed the run's shards: %v", st)
	}
	if code, _, e := runCLI(t, "cache", "gc", other, "--cache", cacheDir, "--older-than", "1h"); code != ExitUsage || !strings.Contains(e, "floor") {
		t.Errorf("--older-than below the floor: exit %d, %q", code, e)
	}
	if leases, _ := filepath.Glob(filepath.Join(cacheDir, "leases", "*.lease")); len(leases) != 0 {
		t.Errorf("leases left after the runs: %v", leases)
	}
}

// out/<name> always shows one complete run: a rerun with a new θ grid and a
// dropped size swaps in a new generation (the dropped branch's files gone,
// a user's file kept, unchanged files hard-linked rather than rewritten);
// a rerun that fails while writing leaves the previous generation in place;
// an output folder from before generations is taken over.
func TestOutputGenerations(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out, cacheDir := filepath.Join(dir, "out"), filepath.Join(dir, "cache")
	run := func(sets ...string) (int, string) {
		args := []string{"run", study, "--out", out, "--cache", cacheDir}
		for _, s := range sets {
			args = append(args, "--set", s)
		}
		code, _, e := runCLI(t, args...)
		return code, e
	}
	if code, e := run(); code != 0 {
		t.Fatal(e)
	}
	if fi, err := os.Lstat(out); err != nil || fi.Mode()&os.ModeSymlink == 0 {
		t.Fatalf("%s is not a link to a generation: %v", out, err)
	}
	gen1, _ := filepath.EvalSymlinks(out)
	sidecar := filepath.Join(out, "L6_beta0.4", "samples", "M6_chunk0.json")
	before, _ := os.Stat(sidecar)
	os.WriteFile(filepath.Join(out, "notes.txt"), []byte("mine"), 0o644)
	if code, e := run("model.sizes=[6]", "transform.theta_points=21"); code != 0 {
		t.Fatal(e)
	}
	gen2, _ := filepath.EvalSymlinks(out)
	if gen2 == gen1 {
		t.Fatal("no new generation")
	}
	if _, err := os.Stat(gen1); err == nil {
		t.Error("the previous generation was not removed")
	}
	if b, err := os.ReadFile(filepath.Join(out, "notes.txt")); err != nil || string(b) != "mine" {
		t.Error("the user's file was not kept")
	}
	if _, err := os.Stat(filepath.Join(out, "L8_beta0.4")); err == nil {
		t.Error("files of a branch no longer in the study stayed")
	}
	if s := readSummary(t, out); len(s.Branches) != 1 {
		t.Errorf("summary has %d branches", len(s.Branches))
	}
	if after, err := os.Stat(sidecar); err != nil || !os.SameFile(before, after) {
		t.Error("an unchanged sidecar was rewritten instead of linked")
	}
	// a failure while writing leaves the current generation untouched
	man, _ := os.ReadFile(filepath.Join(out, "manifest.json"))
	os.Remove(filepath.Join(out, "summary.json"))
	os.Mkdir(filepath.Join(out, "summary.json"), 0o777) // writing summary.json will fail
	if code, _ := run("transform.theta_points=31"); code == 0 {
		t.Fatal("the run did not fail")
	}
	if now, _ := filepath.EvalSymlinks(out); now != gen2 {
		t.Errorf("a failed run moved the link to %s", now)
	}
	if b, _ := os.ReadFile(filepath.Join(out, "manifest.json")); string(b) != string(man) {
		t.Error("a failed run changed the visible manifest")
	}
	if gens, _ := filepath.Glob(filepath.Join(dir, ".out.gen*")); len(gens) != 1 {
		t.Errorf("generations left: %v", gens)
	}
	// an old-style output folder is taken over
	legacy := filepath.Join(dir, "legacy")
	os.MkdirAll(filepath.Join(legacy, "L6_beta0.4"), 0o777)
	os.WriteFile(filepath.Join(legacy, "mine.txt"), []byte("x"), 0o644)
	if code, _, e := runCLI(t, "run", study, "--out", legacy, "--cache", cacheDir); code != 0 {
		t.Fatal(e)
	}
	if fi, _ := os.Lstat(legacy); fi.Mode()&os.ModeSymlink == 0 {
		t.Error("legacy folder not turned into a generation link")
	}
	if _, err := os.Stat(filepath.Join(legacy, "mine.txt")); err != nil {
		t.Error("legacy user file lost")
	}
}

// plan always prints the resource estimate and only warns; run refuses an
// estimate beyond this machine's free memory or disk before any work.
func TestResourceEstimates(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	cacheDir := filepath.Join(dir, "cache")
	code, stdout, _ := runCLI(t, "plan", study, "--cache", cacheDir)
	if code != 0 || !strings.Contains(stdout, "estimate: peak memory") || !strings.Contains(stdout, "new cache data") {
		t.Errorf("plan: exit %d\n%s", code, stdout)
	}
	huge := []string{"--set", "sample.sweeps=1000000000000", "--set", "sample.chunk_sweeps=100000000000"}
	if availableMemory() == 0 && availableDisk(dir) == 0 {
		t.Skip("this system reports neither free memory nor free disk")
	}
	code, stdout, stderr := runCLI(t, append([]string{"plan", study, "--cache", cacheDir}, huge...)...)
	if code != 0 || !strings.Contains(stderr, "warning") {
		t.Errorf("plan of a huge study: exit %d, %q", code, stderr)
	}
	_ = stdout
	start := time.Now()
	code, _, stderr = runCLI(t, append([]string{"run", study, "--cache", cacheDir, "--out", filepath.Join(dir, "out")}, huge...)...)
	if code != ExitUsage || !strings.Contains(stderr, "exceeds") {
		t.Errorf("run of a huge study: exit %d, %q", code, stderr)
	}
	if time.Since(start) > 5*time.Second {
		t.Error("the refusal came after work")
	}
}

// A panic inside one stage fails that node and what depends on it, with a
// message, instead of killing the run.
func TestStagePanicFailsOnlyItsNode(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	var o, e strings.Builder
	env := &env{stdout: &o, stderr: &e, outputHook: func(stage string, out []byte) []byte {
		if stage == "transform" {
			panic("injected")
		}
		return out
	}}
	code := env.studyCommand("run", []string{study, "--cache", filepath.Join(dir, "c"), "--out", filepath.Join(dir, "out")})
	if code != ExitFail || !strings.Contains(e.String(), "internal error") || !strings.Contains(e.String(), "injected") {
		t.Errorf("exit %d, stderr %q", code, e.String())
	}
	if n := countIndexEntries(filepath.Join(dir, "c")); n < 18 {
		t.Errorf("only %d cache entries: the other nodes' results were lost", n)
	}
}

// An output path that is a link the user made to a folder of theirs is
// taken over without deleting that folder; a link whose generation is gone
// starts afresh.
func TestOutputLinkOfTheUser(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	mine := filepath.Join(dir, "mine")
	os.MkdirAll(mine, 0o777)
	os.WriteFile(filepath.Join(mine, "keep.txt"), []byte("x"), 0o644)
	out := filepath.Join(dir, "out")
	if err := os.Symlink(mine, out); err != nil {
		t.Fatal(err)
	}
	if code, _, e := runCLI(t, "run", study, "--out", out, "--cache", filepath.Join(dir, "c")); code != 0 {
		t.Fatal(e)
	}
	if _, err := os.Stat(filepath.Join(mine, "keep.txt")); err != nil {
		t.Error("the user's folder behind the link was removed")
	}
	if _, err := os.Stat(filepath.Join(out, "summary.json")); err != nil {
		t.Error("no outputs behind the link")
	}
	gen, _ := filepath.EvalSymlinks(out)
	os.RemoveAll(gen) // the generation vanishes
	if code, _, e := runCLI(t, "run", study, "--out", out, "--cache", filepath.Join(dir, "c")); code != 0 {
		t.Fatalf("rerun after the generation vanished: %s", e)
	}
	if _, err := os.Stat(filepath.Join(out, "summary.json")); err != nil {
		t.Error("no outputs after the rerun")
	}
}
