package pipeline

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const ladderStudy = `
name = "lad"
[model]
dimension = 1
sizes = [8, 12]
betas = [0.4]
[sample]
sweeps = [1000, 2000, 4000]
chunk_sweeps = 1000
seed = 3
[stitch]
replicas = 40
[transform]
theta_max = 0.6
theta_points = 61
`

// A statistics ladder costs what its top rung costs: its rungs are the
// first chunks of the same shards, so it computes exactly the shards of a
// single study at the top rung, whose branch CSVs are byte-identical to
// the ladder's; every lower rung gets rung<sweeps>/ (no samples) and the
// branch a cost.csv with one row per rung and a cost block in summary.json.
func TestLadderNestedRungs(t *testing.T) {
	dir := t.TempDir()
	ladder := writeStudy(t, dir, "lad.toml", ladderStudy)
	single := writeStudy(t, dir, "one.toml", strings.Replace(ladderStudy, "sweeps = [1000, 2000, 4000]", "sweeps = 4000", 1))
	lo, so := filepath.Join(dir, "lo"), filepath.Join(dir, "so")
	if code, _, e := runCLI(t, "run", ladder, "--out", lo, "--cache", filepath.Join(dir, "c1")); code != 0 {
		t.Fatal(e)
	}
	if code, _, e := runCLI(t, "run", single, "--out", so, "--cache", filepath.Join(dir, "c2")); code != 0 {
		t.Fatal(e)
	}
	a, b := statusByStage(readManifest(t, lo))["sample"], statusByStage(readManifest(t, so))["sample"]
	if a["computed"] != b["computed"] || a["computed"] == 0 {
		t.Errorf("ladder computed %v sample shards, the single top-rung study %v", a, b)
	}
	for _, f := range []string{"ratios.csv", "density.csv", "transform.csv"} {
		x, err1 := os.ReadFile(filepath.Join(lo, "L12_beta0.4", f))
		y, err2 := os.ReadFile(filepath.Join(so, "L12_beta0.4", f))
		if err1 != nil || err2 != nil || !bytes.Equal(x, y) {
			t.Errorf("top rung %s differs from the single study's (%v, %v)", f, err1, err2)
		}
	}
	for _, r := range []string{"rung1000", "rung2000"} {
		if _, err := os.Stat(filepath.Join(lo, "L12_beta0.4", r, "transform.csv")); err != nil {
			t.Errorf("%s: %v", r, err)
		}
		if _, err := os.Stat(filepath.Join(lo, "L12_beta0.4", r, "samples")); err == nil {
			t.Errorf("%s has samples", r)
		}
	}
	cost := readCSV(t, filepath.Join(lo, "L12_beta0.4", "cost.csv"))
	if got := cost["sweeps"]; len(got) != 3 || got[0] != 1000 || got[2] != 4000 {
		t.Errorf("cost.csv sweeps %v", got)
	}
	if e := cost["theta_ref_sign_err"]; !(e[0] > e[1] && e[1] > e[2]) {
		t.Errorf("the sign's error at θ_ref does not fall with the sweeps: %v", e)
	}
	s := readSummary(t, lo)
	if s.Branches[0].Cost == nil {
		t.Error("no cost block in summary.json")
	}
	if len(s.CostFits) != 3 || s.CostFits[0].Sweeps != 1000 || len(s.CostFits[0].Sizes) != 2 {
		t.Errorf("cost_fits: %+v", s.CostFits)
	}
	if _, err := os.Stat(filepath.Join(so, "L12_beta0.4", "cost.csv")); err == nil {
		t.Error("a single-rung study wrote cost.csv")
	}
	if _, err := ParseStudy("x.toml", []byte(ladderStudy), []string{"sample.sweeps=[1000,1500]"}); err == nil {
		t.Error("a rung that is not whole chunks was accepted")
	}
}
