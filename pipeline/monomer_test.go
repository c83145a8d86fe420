package pipeline

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const monomerRing = `
name = "mono"
[model]
dimension = 1
sizes = [8, 12]
betas = [0.5]
[sample]
sweeps = 20000
chunk_sweeps = 5000
seed = 11
sectors = ["monomer", "magnetization"]
[transform]
theta_max = 0.7
theta_points = 71

[[expect]]
branch = "L8_beta0.5_monomer"
quantity = "first_zero"
exact = true
sigma = 3

[[expect]]
size = 12
beta = 0.5
sectors = "monomer"
quantity = "ln_D"
n = 6
exact = true
sigma = 3
`

// A study with both representations: branch folders and summary fields by
// the fixed names, the monomer tables, the comparison list, the monomer
// first zero against the ring's closed-form zero (transfer matrix: R. J.
// Baxter, Exactly Solved Models, ch. 2) within 3σ, exact ln D from the
// ring's link transfer matrix, and outputs independent of the worker
// count (CPU-second provenance aside).
func TestMonomerStudy(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "mono.toml", monomerRing)
	o1, o2 := filepath.Join(dir, "o1"), filepath.Join(dir, "o2")
	if code, _, e := runCLI(t, "run", study, "--jobs", "1", "--out", o1, "--cache", filepath.Join(dir, "c1")); code != 0 {
		t.Fatal(e)
	}
	if code, _, e := runCLI(t, "run", study, "--jobs", "2", "--out", o2, "--cache", filepath.Join(dir, "c2")); code != 0 {
		t.Fatal(e)
	}
	sameOutputs(t, outputsOf(t, o1), outputsOf(t, o2))
	s := readSummary(t, o1)
	dirs := map[string]string{}
	for _, b := range s.Branches {
		dirs[b.Dir] = b.Sectors
	}
	for d, want := range map[string]string{"L8_beta0.5": "magnetization", "L8_beta0.5_monomer": "monomer",
		"L12_beta0.5": "magnetization", "L12_beta0.5_monomer": "monomer"} {
		if dirs[d] != want {
			t.Errorf("branch %s: sectors %q, want %q (all: %v)", d, dirs[d], want, dirs)
		}
	}
	for _, sc := range s.Scaling {
		if sc.Sectors != "magnetization" && sc.Sectors != "monomer" {
			t.Errorf("scaling entry with sectors %q", sc.Sectors)
		}
	}
	for _, f := range []string{"scaling_beta0.5.csv", "scaling_beta0.5_monomer.csv", "L8_beta0.5_monomer/ratios.csv",
		"L8_beta0.5_monomer/density.csv", "L8_beta0.5_monomer/transform.csv", "L8_beta0.5_monomer/samples/n4_chunk0.npy",
		"figures/L8_beta0.5_comparison.svg"} {
		if _, err := os.Stat(filepath.Join(o1, f)); err != nil {
			t.Errorf("missing %s", f)
		}
	}
	head := func(f string) string {
		b, _ := os.ReadFile(filepath.Join(o1, f))
		return strings.SplitN(string(b), "\n", 2)[0]
	}
	if h := head("L8_beta0.5_monomer/ratios.csv"); h != "n,ln_ratio,ln_ratio_err,tau_int,ln_ratio_exact" {
		t.Errorf("monomer ratios.csv header %q", h)
	}
	if h := head("L8_beta0.5_monomer/density.csv"); h != "n,ln_D,ln_D_err,ln_D_exact" {
		t.Errorf("monomer density.csv header %q", h)
	}
	if len(s.Comparison) != 2 {
		t.Fatalf("comparison has %d entries, want 2", len(s.Comparison))
	}
	for _, c := range s.Comparison {
		m, d := c.Magnetization, c.Monomer
		if m.Reach == nil || d.Reach == nil || c.Theta == nil || *c.Theta != math.Min(*m.Reach, *d.Reach) {
			t.Errorf("L=%d: common θ %v, reaches %v %v", c.Size, c.Theta, m.Reach, d.Reach)
		}
		if d.SigmaSignSqrtCPU == nil || !(*d.SigmaSignSqrtCPU > 0) || d.CPUSeconds == nil {
			t.Errorf("L=%d: monomer side %+v", c.Size, d)
		}
	}
	// the monomer zero against the exact ring zero
	for _, b := range s.Branches {
		if b.Sectors != "monomer" {
			continue
		}
		if b.FirstZero == nil || b.ExactFirstZero == nil {
			t.Errorf("%s: zero %v, exact %v", b.Dir, b.FirstZero, b.ExactFirstZero)
			continue
		}
		if p := (b.FirstZero.Value - *b.ExactFirstZero) / b.FirstZero.Error; math.Abs(p) > 3 {
			t.Errorf("%s: first zero %.5f ± %.5f, exact %.5f (pull %.1f)", b.Dir, b.FirstZero.Value, b.FirstZero.Error, *b.ExactFirstZero, p)
		}
	}
	if code, out, e := runCLI(t, "check", study, "--out", o1, "--cache", filepath.Join(dir, "c1")); code != 0 {
		t.Errorf("check failed:\n%s\n%s", out, e)
	}
	if code, out, _ := runCLI(t, "show", study, "--cache", filepath.Join(dir, "c1")); code != 0 || !strings.Contains(out, "representations compared") {
		t.Errorf("show lacks the comparison:\n%s", out)
	}
}

// Studies that cannot sample monomer sectors are refused at load, naming
// the key.
func TestMonomerStudyRefusals(t *testing.T) {
	dir := t.TempDir()
	for _, c := range []struct{ edit, want string }{
		{`estimator = "bennett"`, "sample.estimator"},
		{`sectors = ["monomer", "monomer"]`, "sample.sectors"},
		{`sectors = ["links"]`, "sample.sectors"},
		{`sectors = []`, "sample.sectors"},
	} {
		text := strings.Replace(monomerRing, `sectors = ["monomer", "magnetization"]`, c.edit+"\n"+`sectors = ["monomer", "magnetization"]`, 1)
		if strings.HasPrefix(c.edit, "sectors") {
			text = strings.Replace(monomerRing, `sectors = ["monomer", "magnetization"]`, c.edit, 1)
		}
		study := writeStudy(t, dir, "bad.toml", text)
		code, _, e := runCLI(t, "plan", study)
		if code == 0 || !strings.Contains(e, c.want) {
			t.Errorf("%s: exit %d, stderr %q (want a message naming %s)", c.edit, code, e, c.want)
		}
	}
	// ln_rho on a monomer branch, ln_D on a magnetization branch
	for _, edit := range []string{`quantity = "ln_rho"` + "\nM = 0", `quantity = "ln_D"` + "\nn = 2"} {
		text := monomerRing + "\n[[expect]]\nbranch = \"L8_beta0.5" + map[bool]string{true: "_monomer", false: ""}[strings.Contains(edit, "ln_rho")] + "\"\n" + edit + "\nvalue = 1\nsigma = 1\n"
		study := writeStudy(t, dir, "bad.toml", text)
		if code, _, e := runCLI(t, "check", study, "--cache", filepath.Join(dir, "c"), "--out", filepath.Join(dir, "o")); code != ExitUsage || !strings.Contains(e, "expect") {
			t.Errorf("%q accepted (stderr %q)", edit, e)
		}
	}
}

// The sample key and seed depend on the chain, not on the estimator:
// insertion and bennett plan the same shards (a reanalysis with the other
// one resamples nothing), indicator its own two-sector chains.
func TestEstimatorsShareShards(t *testing.T) {
	keys := func(est string) map[string]bool {
		st, err := ParseStudy("s.toml", []byte("[model]\ndimension = 2\nsizes = [4]\nbetas = [0.3]\n[sample]\nestimator = \""+est+"\"\n"), nil)
		if err != nil {
			t.Fatal(err)
		}
		out := map[string]bool{}
		for _, n := range BuildPlan(st).Nodes {
			if n.Task.Stage == "sample" {
				out[n.Key.String()] = true
			}
		}
		return out
	}
	ins, ben, ind := keys("insertion"), keys("bennett"), keys("indicator")
	if len(ins) == 0 || len(ins) != len(ben) {
		t.Fatalf("%d insertion shards, %d bennett shards", len(ins), len(ben))
	}
	for k := range ins {
		if !ben[k] {
			t.Fatalf("insertion shard %s is not a bennett shard", k)
		}
		if ind[k] {
			t.Fatalf("the indicator chain shares shard %s", k)
		}
	}
}
