package pipeline

import (
	"bytes"
	"encoding/json"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"strata/cache"
)

const tinyStudy = `
name = "tiny"
[model]
dimension = 1
sizes = [6, 8]
betas = [0.4]
[sample]
sweeps = 2000
chunk_sweeps = 1000
seed = 7
[stitch]
replicas = 50
[transform]
theta_max = 0.8
theta_points = 41
`

// tinyReordered is tinyStudy with tables and keys reordered and comments.
const tinyReordered = `
# same study, different layout
[transform]
theta_points = 41   # grid
theta_max = 0.8
[stitch]
replicas = 50
[sample]
seed = 7
chunk_sweeps = 1000
sweeps = 2000
[model]
betas = [0.4]
sizes = [6, 8]
dimension = 1
`

func writeStudy(t *testing.T, dir, name, text string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// runCLI runs the command line in-process.
func runCLI(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var o, e bytes.Buffer
	code = Main(args, &o, &e)
	return code, o.String(), e.String()
}

func readManifest(t *testing.T, out string) Manifest {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(out, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var m Manifest
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	return m
}

func statusByStage(m Manifest) map[string]map[string]int {
	out := map[string]map[string]int{}
	for _, n := range m.Nodes {
		if out[n.Stage] == nil {
			out[n.Stage] = map[string]int{}
		}
		out[n.Stage][n.Status]++
	}
	return out
}

func TestKeysStableUnderReordering(t *testing.T) {
	a, err := ParseStudy("a.toml", []byte(tinyStudy), nil)
	if err != nil {
		t.Fatal(err)
	}
	_, err = ParseStudy("b.toml", []byte(tinyReordered+"\nname = \"tiny\"\n"), nil)
	if err == nil {
		t.Fatal("a top-level key after a table belongs to that table: expected an unknown-key error")
	}
	b, err := ParseStudy("b.toml", []byte("name = \"tiny\"\n"+tinyReordered), nil)
	if err != nil {
		t.Fatal(err)
	}
	pa, pb := BuildPlan(a), BuildPlan(b)
	if len(pa.Nodes) != len(pb.Nodes) {
		t.Fatalf("node counts differ: %d vs %d", len(pa.Nodes), len(pb.Nodes))
	}
	for i := range pa.Nodes {
		if pa.Nodes[i].Key != pb.Nodes[i].Key {
			t.Errorf("%s: key changed under reordering", pa.Nodes[i].Name())
		}
	}
	_, ha := a.Canonical()
	_, hb := b.Canonical()
	if ha != hb {
		t.Error("study hash changed under reordering")
	}
}

func TestGridChangeInvalidatesOnlyDownstream(t *testing.T) {
	a, _ := ParseStudy("a.toml", []byte(tinyStudy), nil)
	b, err := ParseStudy("a.toml", []byte(tinyStudy), []string{"transform.theta_max=0.6", "transform.theta_points=31"})
	if err != nil {
		t.Fatal(err)
	}
	pa, pb := BuildPlan(a), BuildPlan(b)
	for i := range pa.Nodes {
		same := pa.Nodes[i].Key == pb.Nodes[i].Key
		switch pa.Nodes[i].Task.Stage {
		case "transform", "scaling":
			if same {
				t.Errorf("%s: key did not change with the θ grid", pa.Nodes[i].Name())
			}
		default:
			if !same {
				t.Errorf("%s: key changed with the θ grid", pa.Nodes[i].Name())
			}
		}
	}
}

func TestSweepsGrowthReusesChunks(t *testing.T) {
	a, _ := ParseStudy("a.toml", []byte(tinyStudy), nil)
	b, err := ParseStudy("a.toml", []byte(tinyStudy), []string{"sample.sweeps=3000"})
	if err != nil {
		t.Fatal(err)
	}
	old := map[cache.Key]bool{}
	for _, n := range BuildPlan(a).Nodes {
		if n.Task.Stage == "sample" {
			old[n.Key] = true
		}
	}
	reused, added := 0, 0
	for _, n := range BuildPlan(b).Nodes {
		if n.Task.Stage == "sample" {
			if old[n.Key] {
				reused++
			} else {
				added++
			}
		}
	}
	if reused != len(old) || added != len(old)/2 {
		t.Errorf("reused %d of %d chunks, added %d (want all reused and %d added)", reused, len(old), added, len(old)/2)
	}
}

func TestRunCachesAndRerunsOnlyTransform(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, stderr := runCLI(t, "run", study, "--out", out, "--jobs", "2"); code != 0 {
		t.Fatalf("run: exit %d: %s", code, stderr)
	}
	for _, n := range readManifest(t, out).Nodes {
		if n.Status != "computed" {
			t.Fatalf("first run: %s %s %s is %s", n.Stage, n.Branch, n.Label, n.Status)
		}
	}
	// identical rerun: nothing computed
	if code, _, stderr := runCLI(t, "run", "--out", out, study); code != 0 {
		t.Fatalf("rerun: %s", stderr)
	}
	for _, n := range readManifest(t, out).Nodes {
		if n.Status != "cached" {
			t.Errorf("identical rerun computed %s %s %s", n.Stage, n.Branch, n.Label)
		}
	}
	// only the grid changed
	code, _, stderr := runCLI(t, "run", study, "--out", out, "--set", "transform.theta_max=0.5", "--set", "transform.theta_points=21")
	if code != 0 {
		t.Fatalf("grid rerun: %s", stderr)
	}
	st := statusByStage(readManifest(t, out))
	for _, stage := range []string{"sample", "ratios", "stitch", "exact"} {
		if st[stage]["computed"] != 0 || st[stage]["cached"] == 0 {
			t.Errorf("grid change: stage %s: %v", stage, st[stage])
		}
	}
	for _, stage := range []string{"transform", "scaling"} {
		if st[stage]["computed"] == 0 {
			t.Errorf("grid change did not recompute %s: %v", stage, st[stage])
		}
	}
	// plan names the parameter that made transform stale
	_, stdout, _ := runCLI(t, "plan", study, "--out", out, "--set", "transform.theta_max=0.6", "--set", "transform.theta_points=21")
	if !strings.Contains(stdout, "param theta_max: 0.5 → 0.6") {
		t.Errorf("plan does not explain the stale transform:\n%s", stdout)
	}
}

func TestCorruptObjectIsRecomputed(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, stderr := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(stderr)
	}
	before, _ := os.ReadFile(filepath.Join(out, "summary.json"))
	st, _ := LoadStudy(study, nil)
	plan := BuildPlan(st)
	c, _ := cache.Open(filepath.Join(dir, ".strata-cache"))
	victim := plan.Branches[0].Ratios
	path, err := c.DataPath(victim.Key)
	if err != nil {
		t.Fatal(err)
	}
	os.Chmod(path, 0o644)
	if err := os.WriteFile(path, []byte(`{"garbage": true}`), 0o644); err != nil {
		t.Fatal(err)
	}
	if code, _, _ := runCLI(t, "cache", "verify", "--cache", c.Dir()); code != 1 {
		t.Errorf("cache verify exit %d on a damaged object, want 1", code)
	}
	code, _, stderr := runCLI(t, "run", study, "--out", out)
	if code != 0 {
		t.Fatalf("run after corruption: exit %d: %s", code, stderr)
	}
	if !strings.Contains(stderr, "warning") || !strings.Contains(stderr, "recomputing") {
		t.Errorf("no warning about the corrupt object:\n%s", stderr)
	}
	after, _ := os.ReadFile(filepath.Join(out, "summary.json"))
	if !bytes.Equal(before, after) {
		t.Error("results differ after recomputing a corrupt object")
	}
	if code, _, _ := runCLI(t, "cache", "verify", "--cache", c.Dir()); code != 0 {
		t.Errorf("cache verify exit %d after recovery", code)
	}
}

// outputsOf returns every output file except those that carry provenance
// (the manifest and the report, which shows each node's status).
func outputsOf(t *testing.T, out string) map[string][]byte {
	t.Helper()
	files := map[string][]byte{}
	out, _ = filepath.EvalSymlinks(out) // out/<name> links to its current generation
	filepath.Walk(out, func(p string, info os.FileInfo, err error) error {
		if err != nil || info.IsDir() || filepath.Base(p) == "manifest.json" || filepath.Base(p) == "report.html" ||
			strings.Contains(filepath.Base(p), "_comparison.") || filepath.Base(p) == "index.json" {
			// provenance: timings, CPU seconds (the comparison figures plot
			// σ·√cpu, and figures/index.json holds every figure's hash)
			return err
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(out, p)
		files[rel] = cpuProvenance.ReplaceAll(b, []byte(`"cpu_seconds": provenance`))
		return nil
	})
	return files
}

// cpuProvenance matches the CPU seconds in summary.json, which are
// provenance (they differ between runs) and excluded from bit-identity.
var cpuProvenance = regexp.MustCompile(`"(cpu_seconds|sigma_sign_sqrt_cpu)": [-+0-9.eE]+`)

func sameOutputs(t *testing.T, a, b map[string][]byte) {
	t.Helper()
	if len(a) != len(b) || len(a) == 0 {
		t.Fatalf("output file counts differ: %d vs %d", len(a), len(b))
	}
	for k, v := range a {
		if !bytes.Equal(v, b[k]) {
			t.Errorf("%s differs", k)
		}
	}
}

func TestJobsDoNotChangeResults(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	o1, o4 := filepath.Join(dir, "o1"), filepath.Join(dir, "o4")
	if code, _, e := runCLI(t, "run", study, "--jobs", "1", "--out", o1, "--cache", filepath.Join(dir, "c1")); code != 0 {
		t.Fatal(e)
	}
	if code, _, e := runCLI(t, "run", study, "--jobs", "4", "--out", o4, "--cache", filepath.Join(dir, "c4")); code != 0 {
		t.Fatal(e)
	}
	sameOutputs(t, outputsOf(t, o1), outputsOf(t, o4))
}

// Two strata processes on one cache at the same time both succeed and
// produce identical results.
func TestConcurrentRunsShareCache(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	type result struct {
		code int
		out  string
	}
	done := make(chan result, 2)
	for _, o := range []string{"a", "b"} {
		go func(o string) {
			code, out := strataProcess(t, nil, "run", study, "--out", filepath.Join(dir, o), "--jobs", "2")
			done <- result{code, out}
		}(o)
	}
	for i := 0; i < 2; i++ {
		if r := <-done; r.code != 0 {
			t.Fatalf("concurrent run exit %d\n%s", r.code, r.out)
		}
	}
	sameOutputs(t, outputsOf(t, filepath.Join(dir, "a")), outputsOf(t, filepath.Join(dir, "b")))
	if code, _, _ := runCLI(t, "cache", "verify", "--cache", filepath.Join(dir, ".strata-cache")); code != 0 {
		t.Error("cache damaged by concurrent runs")
	}
}

func TestOutputsContract(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(e)
	}
	heads := map[string]string{
		"L6_beta0.4/ratios.csv":    "M,ln_ratio,ln_ratio_err,tau_int,ln_ratio_exact",
		"L6_beta0.4/density.csv":   "M,ln_rho,ln_rho_err,ln_rho_exact,ln_rho_exact_err",
		"L6_beta0.4/transform.csv": "theta,sign,sign_err,im_m,im_m_err,delta_f,delta_f_err,sign_exact,im_m_exact",
		"scaling_beta0.4.csv":      "L,theta1,theta1_err,theta1_exact",
	}
	for f, h := range heads {
		b, err := os.ReadFile(filepath.Join(out, f))
		if err != nil {
			t.Fatal(err)
		}
		if got := strings.SplitN(string(b), "\n", 2)[0]; got != h {
			t.Errorf("%s header %q, want %q", f, got, h)
		}
	}
	var s map[string]any
	b, _ := os.ReadFile(filepath.Join(out, "summary.json"))
	if err := json.Unmarshal(b, &s); err != nil {
		t.Fatal(err)
	}
	br := s["branches"].([]any)[0].(map[string]any)
	for _, k := range []string{"size", "beta", "dir", "first_zero", "reach", "exact_first_zero"} {
		if _, ok := br[k]; !ok {
			t.Errorf("summary branch lacks %q", k)
		}
	}
	npys, _ := filepath.Glob(filepath.Join(out, "L6_beta0.4", "samples", "*.npy"))
	jsons, _ := filepath.Glob(filepath.Join(out, "L6_beta0.4", "samples", "*.json"))
	// insertion on 6 sites: chains M = 6, 4, 2, 0, two chunks each
	if len(npys) != 8 || len(jsons) != 8 {
		t.Errorf("samples: %d npy and %d json files, want 8 each", len(npys), len(jsons))
	}
	m := readManifest(t, out)
	for _, n := range m.Nodes {
		switch n.Stage {
		case "sample", "ratios", "stitch", "exact", "transform", "scaling":
		default:
			t.Errorf("manifest stage %q", n.Stage)
		}
	}
}

func TestStagesFlagRunsOnlyWhatIsNeeded(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "run", study, "--out", out, "--stages", "sample,ratios"); code != 0 {
		t.Fatal(e)
	}
	st := statusByStage(readManifest(t, out))
	if len(st) != 2 || st["sample"]["computed"] == 0 || st["ratios"]["computed"] != 2 {
		t.Errorf("--stages sample,ratios ran %v", st)
	}
}

func TestHelpExitsZero(t *testing.T) {
	for _, args := range [][]string{{"--help"}, {"run", "--help"}, {"plan", "-h"}, {"show", "--help"},
		{"exact", "--help"}, {"cache", "--help"}, {"cache", "gc", "--help"}} {
		code, stdout, _ := runCLI(t, args...)
		if code != 0 || !strings.Contains(stdout, "Usage") {
			t.Errorf("%v: exit %d, stdout %q", args, code, stdout)
		}
	}
	if code, _, _ := runCLI(t, "frobnicate"); code != 2 {
		t.Errorf("unknown command exit %d, want 2", code)
	}
	if code, _, _ := runCLI(t, "run"); code != 2 {
		t.Errorf("run without study exit %d, want 2", code)
	}
}

func TestShowExactBudgetCommands(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "show", study); code != 0 || !strings.Contains(e, "no results yet") {
		t.Errorf("show before a run: exit %d, %q", code, e)
	}
	if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(e)
	}
	code, stdout, _ := runCLI(t, "show", study)
	if code != 0 || !strings.Contains(stdout, "L8_beta0.4") || !strings.Contains(stdout, "±") {
		t.Errorf("show: exit %d\n%s", code, stdout)
	}
	code, stdout, _ = runCLI(t, "budget", study, "--theta", "0.45")
	if code != 0 || !strings.Contains(stdout, "exact") || !strings.Contains(stdout, "sweeps needed") || !strings.Contains(stdout, "90%") {
		t.Errorf("budget: exit %d\n%s", code, stdout)
	}
	// beyond the first zero (0.50 and 0.53 here) the reach depends on the grid: refused
	code, stdout, _ = runCLI(t, "budget", study, "--theta", "0.6")
	if code != 1 || !strings.Contains(stdout, "beyond the first zero") {
		t.Errorf("budget beyond the zero: exit %d\n%s", code, stdout)
	}
	code, stdout, _ = runCLI(t, "exact", "--dimension", "1", "--size", "64", "--beta", "0.45", "--theta-max", "0.6", "--theta-points", "121")
	if code != 0 || strings.Count(stdout, "\n") != 4+1+121 || !strings.Contains(stdout, "# first_zero 0.41937") ||
		!strings.Contains(stdout, "# precision: first_zero ± ") {
		t.Errorf("exact: exit %d\n%.300s", code, stdout)
	}
	if code, _, _ := runCLI(t, "exact", "--dimension", "3", "--size", "5", "--beta", "0.2"); code != 2 {
		t.Errorf("exact beyond the limits: exit %d, want 2", code)
	}
}

func TestFitStageOutputs(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	code, _, e := runCLI(t, "run", study, "--out", out, "--set", "fit.enabled=true", "--set", "fit.degrees=[2,4]")
	if code != 0 {
		t.Fatal(e)
	}
	b, _ := os.ReadFile(filepath.Join(out, "L8_beta0.4", "transform.csv"))
	if !strings.Contains(strings.SplitN(string(b), "\n", 2)[0], ",sign_fit2,im_m_fit2,sign_fit4,im_m_fit4") {
		t.Errorf("transform.csv header: %.200s", b)
	}
	s := readSummary(t, out)
	if len(s.Branches[1].Fit) != 2 || s.Branches[1].Fit[0].Degree != 2 || s.Branches[1].Fit[0].Chi2Dof == nil {
		t.Errorf("summary fit block: %+v", s.Branches[1].Fit)
	}
	if _, err := os.Stat(filepath.Join(out, "figures", "L8_beta0.4_fit.svg")); err != nil {
		t.Error(err)
	}
	// the fit is optional: turning it off leaves sampling, ratios and stitch cached
	code, _, e = runCLI(t, "run", study, "--out", out)
	if code != 0 {
		t.Fatal(e)
	}
	st := statusByStage(readManifest(t, out))
	if st["stitch"]["computed"] != 0 || st["fit"] != nil {
		t.Errorf("after disabling the fit: %v", st)
	}
}
