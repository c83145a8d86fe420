package pipeline

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"strata/stages"
)

// The committed suite catches a physics bug: a bias injected into the
// stitched density of states (ln ρ(M) += a(N² − M²)/2, which keeps the
// anchors ρ(±N) and moves ⟨M²⟩ by about 10%) makes `strata check` on the
// ring suite study fail, naming the moved quantities, while the same run
// without the bias passes against the same baseline.
func TestSuiteCatchesInjectedBias(t *testing.T) {
	study := filepath.Join("..", "testdata", "suite", "ring.toml")
	baseline := filepath.Join("..", "testdata", "suite", "ring.summary.json")
	run := func(hook func(string, []byte) []byte) (int, string) {
		dir := t.TempDir()
		var o, e bytes.Buffer
		env := &env{stdout: &o, stderr: &e, outputHook: hook}
		code := env.studyCommand("check", []string{study, "--baseline", baseline, "--sigma", "4",
			"--cache", filepath.Join(dir, "cache"), "--out", filepath.Join(dir, "out")})
		return code, o.String() + e.String()
	}
	if code, out := run(nil); code != 0 {
		t.Fatalf("the suite fails without a bias (exit %d):\n%s", code, out)
	}
	const a = 0.005
	bias := func(stage string, b []byte) []byte {
		if stage != stages.StitchStage {
			return b
		}
		var s stages.StitchOut
		if err := json.Unmarshal(b, &s); err != nil {
			t.Fatal(err)
		}
		shift := func(lr []float64) {
			for k := range lr {
				m := float64(2*k - s.N)
				lr[k] += a * (float64(s.N*s.N) - m*m) / 2
			}
		}
		shift(s.LnRho)
		for _, r := range s.Replicas {
			shift(r)
		}
		out, err := json.Marshal(s)
		if err != nil {
			t.Fatal(err)
		}
		return out
	}
	code, out := run(bias)
	if code != ExitFail {
		t.Fatalf("biased run: exit %d, want %d:\n%s", code, ExitFail, out)
	}
	for _, want := range []string{"FAIL first_zero L16_beta0.5", "FAIL baseline first_zero L16_beta0.5", "FAIL ln_rho L16_beta0.5 M=0"} {
		if !strings.Contains(out, want) {
			t.Errorf("biased run does not report %q:\n%s", want, out)
		}
	}
}

// --refresh-baseline refuses outside git (unless --force) and with
// uncommitted changes under stages/ or pipeline/, and writes a summary that
// the next check passes against.
func TestRefreshBaselineGuards(t *testing.T) {
	if _, err := exec.LookPath("git"); err != nil {
		t.Skip("git is not installed")
	}
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy+"\n[[expect]]\nsize = 6\nbeta = 0.4\nquantity = \"ln_rho\"\nM = 0\nexact = true\nsigma = 4\n")
	base := filepath.Join(dir, "tiny.summary.json")
	args := func(extra ...string) []string {
		return append([]string{"check", study, "--baseline", base, "--refresh-baseline",
			"--cache", filepath.Join(dir, "cache"), "--out", filepath.Join(dir, "out")}, extra...)
	}
	t.Setenv("GIT_CEILING_DIRECTORIES", filepath.Dir(dir)) // never find an enclosing repository
	code, _, stderr := runCLI(t, args()...)
	if code != ExitUsage || !strings.Contains(stderr, "not in a git checkout") {
		t.Errorf("outside git: exit %d, %q", code, stderr)
	}
	if _, err := os.Stat(base); err == nil {
		t.Fatal("a refused refresh wrote the baseline")
	}
	if code, _, stderr := runCLI(t, args("--force")...); code != 0 {
		t.Fatalf("--force: exit %d, %q", code, stderr)
	}
	if code, stdout, _ := runCLI(t, "check", study, "--baseline", base, "--cache", filepath.Join(dir, "cache"), "--out", filepath.Join(dir, "out")); code != 0 {
		t.Errorf("check against the fresh baseline: exit %d\n%s", code, stdout)
	}
	git := func(a ...string) {
		cmd := exec.Command("git", append([]string{"-C", dir}, a...)...)
		cmd.Env = append(os.Environ(), "GIT_AUTHOR_NAME=t", "GIT_AUTHOR_EMAIL=t@t", "GIT_COMMITTER_NAME=t", "GIT_COMMITTER_EMAIL=t@t")
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("git %v: %v\n%s", a, err, out)
		}
	}
	git("init", "-q")
	if err := os.MkdirAll(filepath.Join(dir, "stages"), 0o755); err != nil {
		t.Fatal(err)
	}
	writeStudy(t, dir, "stages/x.go", "package x\n")
	git("add", "stages/x.go")
	git("commit", "-qm", "x")
	if code, _, stderr := runCLI(t, args()...); code != 0 {
		t.Errorf("clean checkout: exit %d, %q", code, stderr)
	}
	writeStudy(t, dir, "stages/x.go", "package x // changed\n")
	code, _, stderr = runCLI(t, args()...)
	if code != ExitUsage || !strings.Contains(stderr, "stages/x.go") {
		t.Errorf("uncommitted change under stages/: exit %d, %q", code, stderr)
	}
}
