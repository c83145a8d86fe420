package pipeline

import (
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"strata/stages"
)

const squareExactStudy = `
name = "sq"
[model]
dimension = 2
sizes = [4, 10]
betas = [0.3]
[sample]
sweeps = 1000
chunk_sweeps = 1000
thermalization = 50
[stitch]
replicas = 20
[ratios]
min_tau_ratio = 10
[transform]
theta_max = 0.2
theta_points = 21
`

// Integer counts where they fit, the floating-point transfer matrix beyond,
// none above exact.max_sites; the θ grid does not touch either.
func TestExactKindsInPlan(t *testing.T) {
	st, err := ParseStudy("sq.toml", []byte(squareExactStudy), nil)
	if err != nil {
		t.Fatal(err)
	}
	if *st.Exact.MaxSites != 144 {
		t.Errorf("default exact.max_sites in 2D = %d, want 144", *st.Exact.MaxSites)
	}
	p := BuildPlan(st)
	small, large := p.Branches[0], p.Branches[1]
	if small.Exact == nil || small.Exact.Inputs[0].Task.Stage != stages.ExactStage {
		t.Errorf("L=4: want the exact reference from integer counts")
	}
	if large.Exact == nil || large.Exact.Inputs[0].Task.Stage != stages.ExactDensityStage {
		t.Fatalf("L=10: want the exact reference from the floating-point transfer matrix")
	}
	regrid, err := ParseStudy("sq.toml", []byte(squareExactStudy), []string{"transform.theta_points=51"})
	if err != nil {
		t.Fatal(err)
	}
	if BuildPlan(regrid).Branches[1].Exact.Inputs[0].Key != large.Exact.Inputs[0].Key {
		t.Error("the θ grid changed the key of the exact density")
	}
	capped, err := ParseStudy("sq.toml", []byte(squareExactStudy), []string{"exact.max_sites=64"})
	if err != nil {
		t.Fatal(err)
	}
	cp := BuildPlan(capped)
	if cp.Branches[0].Exact == nil || cp.Branches[1].Exact != nil {
		t.Error("exact.max_sites = 64 must keep L=4 and drop L=10")
	}
	_, err = ParseStudy("sq.toml", []byte(squareExactStudy), []string{"exact.max_sites=-1"})
	if err == nil || !strings.Contains(err.Error(), "exact.max_sites") || !strings.Contains(err.Error(), "sq.toml") {
		t.Errorf("negative max_sites: %v", err)
	}
	cube, err := ParseStudy("c.toml", []byte("[model]\ndimension = 3\nsizes = [4]\nbetas = [0.2]\n"), nil)
	if err != nil {
		t.Fatal(err)
	}
	if *cube.Exact.MaxSites != 64 || BuildPlan(cube).Branches[0].Exact == nil {
		t.Error("3D L = 4 must carry an exact reference by default")
	}
}

// A 2D study at L = 10 writes the transfer-matrix reference with its
// precision (density.csv ln_rho_exact_err, summary exact_first_zero_err),
// and `strata exact --cache` reuses the same cache object.
func TestExactDensityOutputs(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "sq.toml", squareExactStudy)
	out, cdir := filepath.Join(dir, "out"), filepath.Join(dir, "cache")
	if code, _, e := runCLI(t, "run", study, "--out", out, "--cache", cdir); code != 0 {
		t.Fatal(e)
	}
	s := readSummary(t, out)
	var b10 *BranchSummary
	for i := range s.Branches {
		if s.Branches[i].Size == 10 {
			b10 = &s.Branches[i]
		}
	}
	if b10 == nil || b10.ExactFirstZero == nil || b10.ExactFirstZeroErr == nil {
		t.Fatalf("L=10 branch without an exact first zero and its error: %+v", b10)
	}
	if e := *b10.ExactFirstZeroErr; !(e > 0 && e < 1e-9) {
		t.Errorf("exact first zero error %v, want a bound in (0, 1e−9)", e)
	}
	f, err := os.Open(filepath.Join(out, "L10_beta0.3", "density.csv"))
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(f).ReadAll()
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	col := map[string]int{}
	for i, h := range rows[0] {
		col[h] = i
	}
	for _, r := range rows[1:] {
		v, err1 := strconv.ParseFloat(r[col["ln_rho_exact"]], 64)
		e, err2 := strconv.ParseFloat(r[col["ln_rho_exact_err"]], 64)
		if err1 != nil || err2 != nil || math.IsNaN(v) || !(e > 0 && e < 1e-11) {
			t.Fatalf("density.csv row %v: ln_rho_exact %q, err %q", r, r[col["ln_rho_exact"]], r[col["ln_rho_exact_err"]])
		}
	}
	// budget reads the transfer-matrix reference too
	if code, stdout, stderr := runCLI(t, "budget", study, "--cache", cdir, "--theta", "0.05"); code != 0 || !strings.Contains(stdout, "exact") {
		t.Errorf("budget with a transfer-matrix reference: exit %d\n%s%s", code, stdout, stderr)
	}
	code, stdout, stderr := runCLI(t, "exact", "--dimension", "2", "--size", "10", "--beta", "0.3", "--cache", cdir)
	if code != 0 || strings.Contains(stderr, "computing") {
		t.Errorf("strata exact --cache did not reuse the study's density: exit %d, %q", code, stderr)
	}
	want := "# first_zero " + strconv.FormatFloat(*b10.ExactFirstZero, 'g', -1, 64)
	if !strings.Contains(stdout, want) {
		t.Errorf("strata exact prints\n%.300s\nwant the study's %q", stdout, want)
	}
	if code, _, stderr := runCLI(t, "exact", "--dimension", "2", "--size", "10", "--beta", "0.3", "--cache", ""); code != 0 || !strings.Contains(stderr, "computing") {
		t.Errorf("without a cache: exit %d, %q", code, stderr)
	}
}

// strata exact --sectors monomer prints ln[D(n)/D(0)] of the link
// representation from exact counts (3×3 torus at β = 0.3: D(2)/D(0) =
// 15.8344238770326, the check value verified by enumeration in
// ../shared/PHYSICS.md) and refuses a floating-point density.
func TestExactMonomerCommand(t *testing.T) {
	code, stdout, stderr := runCLI(t, "exact", "--dimension", "2", "--size", "3", "--beta", "0.3", "--sectors", "monomer")
	if code != 0 || !strings.Contains(stdout, "n,ln_D_exact\n0,0\n2,") {
		t.Fatalf("exit %d\n%s%s", code, stdout, stderr)
	}
	line := strings.Split(strings.Split(stdout, "\n2,")[1], "\n")[0]
	v, err := strconv.ParseFloat(line, 64)
	if err != nil || math.Abs(math.Exp(v)-15.8344238770326) > 1e-11 {
		t.Errorf("D(2)/D(0) = exp(%q)", line)
	}
	if code, _, stderr := runCLI(t, "exact", "--dimension", "2", "--size", "10", "--beta", "0.3", "--sectors", "monomer"); code != ExitUsage || !strings.Contains(stderr, "integer counts") {
		t.Errorf("monomer from a floating-point density: exit %d, %q", code, stderr)
	}
}
