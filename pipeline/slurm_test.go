package pipeline

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/BurntSushi/toml"
)

// The snapshot a cluster run stores reloads to the same study: same
// canonical form, same node keys.
func TestSnapshotRoundTrip(t *testing.T) {
	st, err := ParseStudy("s.toml", []byte(tinyExpect), []string{"model.sizes=[6,8,10]", "scaling.exponent=2", "fit.enabled=true", "fit.degrees=[2,4,6]"})
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := toml.NewEncoder(&b).Encode(st); err != nil {
		t.Fatal(err)
	}
	back, err := ParseStudy("snapshot.toml", b.Bytes(), nil)
	if err != nil {
		t.Fatalf("%v\n%s", err, b.String())
	}
	c1, _ := st.Canonical()
	c2, _ := back.Canonical()
	if !bytes.Equal(c1, c2) {
		t.Errorf("snapshot changes the study:\n%s\n%s", c1, c2)
	}
}

func TestSlurmDryRun(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "s.toml", tinyStudy)
	code, stdout, _ := runCLI(t, "slurm", study, "--tasks", "3", "--time", "01:00:00", "--dry-run", "--cache", "rel-cache", "--out", filepath.Join(dir, "out"))
	wd, _ := os.Getwd()
	for _, want := range []string{"#SBATCH --array=0-2", "#SBATCH --time=01:00:00", "--shard \"${SLURM_ARRAY_TASK_ID}/3\" --stages sample",
		"--cache " + filepath.Join(wd, "rel-cache")} {
		if !strings.Contains(stdout, want) {
			t.Errorf("dry run lacks %q:\n%s", want, stdout)
		}
	}
	if code != 0 || strings.Contains(stdout, "--partition") || strings.Contains(stdout, "--account") {
		t.Errorf("exit %d; options not given must be left out:\n%s", code, stdout)
	}
}

const slurmStudy = `
name = "cluster"
[model]
dimension = 2
sizes = [4, 6]
betas = [0.3]
[sample]
sweeps = 2000
seed = 3
[transform]
theta_max = 0.4
theta_points = 41
`

// strataProcess runs the test binary as the strata command in a new
// process (sbatch passes the environment on to the jobs).
func strataProcess(t *testing.T, env []string, args ...string) (int, string) {
	t.Helper()
	cmd := exec.Command(os.Args[0], args...)
	cmd.Env = append(append(os.Environ(), "STRATA_TEST_AS_MAIN=1"), env...)
	out, err := cmd.CombinedOutput()
	if ee, ok := err.(*exec.ExitError); ok {
		return ee.ExitCode(), string(out)
	}
	if err != nil {
		t.Fatal(err)
	}
	return 0, string(out)
}

var reComputed = regexp.MustCompile(`sample\s+\d+ nodes: (\d+) computed`)

func computedInLogs(t *testing.T, logs string) map[int]int {
	out := map[int]int{}
	files, _ := filepath.Glob(filepath.Join(logs, "sample-*.log"))
	for _, f := range files {
		b, _ := os.ReadFile(f)
		i, _ := strconv.Atoi(strings.TrimSuffix(strings.TrimPrefix(filepath.Base(f), "sample-"), ".log"))
		if m := reComputed.FindSubmatch(b); m != nil {
			out[i], _ = strconv.Atoi(string(m[1]))
		} else {
			out[i] = -1
		}
	}
	return out
}

// Against a real single-node Slurm (started by .ci/run): a cluster run
// gives the same outputs as a local run; a failed array task is reported,
// and a resubmission computes only the shards that task owned.
func TestSlurmCluster(t *testing.T) {
	if os.Getenv("STRATA_SLURM_TEST") != "1" {
		t.Skip("no test Slurm cluster (STRATA_SLURM_TEST unset); .ci/run starts one")
	}
	if _, err := exec.LookPath("sbatch"); err != nil {
		t.Skip("sbatch not installed")
	}
	dir := t.TempDir()
	study := writeStudy(t, dir, "cluster.toml", slurmStudy)
	local := filepath.Join(dir, "local")
	if code, _, e := runCLI(t, "run", study, "--out", local, "--cache", filepath.Join(dir, "cache-local")); code != 0 {
		t.Fatal(e)
	}
	remote := filepath.Join(dir, "remote")
	code, out := strataProcess(t, nil, "slurm", study, "--tasks", "4", "--wait", "--cache", filepath.Join(dir, "cache-remote"), "--out", remote)
	if code != 0 {
		t.Fatalf("slurm run: exit %d\n%s", code, out)
	}
	a, b := outputsOf(t, local), outputsOf(t, remote)
	compared := 0
	for name, data := range a {
		if name != "summary.json" && !strings.HasSuffix(name, ".csv") {
			continue
		}
		compared++
		if !bytes.Equal(data, b[name]) {
			t.Errorf("%s differs between the local and the cluster run", name)
		}
	}
	if compared < 7 {
		t.Errorf("compared only %d files", compared)
	}

	// one array task fails, then a resubmission redoes only its shards
	again := filepath.Join(dir, "again")
	cache := filepath.Join(dir, "cache-again")
	code, out = strataProcess(t, []string{"STRATA_FAIL_SHARD=1"}, "slurm", study, "--tasks", "4", "--wait", "--cache", cache, "--out", again)
	if code != 1 || !strings.Contains(out, "array task 1: FAILED") || !strings.Contains(out, "sample-1.log") {
		t.Fatalf("failed task not reported: exit %d\n%s", code, out)
	}
	code, out = strataProcess(t, nil, "slurm", study, "--tasks", "4", "--wait", "--cache", cache, "--out", again)
	if code != 0 {
		t.Fatalf("resubmission: exit %d\n%s", code, out)
	}
	st, _ := LoadStudy(study, nil)
	plan := BuildPlan(st)
	var samples []*Node
	for _, n := range plan.Nodes {
		if n.Task.Stage == "sample" {
			samples = append(samples, n)
		}
	}
	owned := 0
	for _, task := range ShardOf(samples, 4) {
		if task == 1 {
			owned++
		}
	}
	got := computedInLogs(t, filepath.Join(again, "slurm", "logs"))
	for task := 0; task < 4; task++ {
		want := 0
		if task == 1 {
			want = owned
		}
		if got[task] != want {
			t.Errorf("resubmission: task %d computed %d shards, want %d (logs: %v)", task, got[task], want, got)
		}
	}
	c, d := outputsOf(t, local), outputsOf(t, again)
	if !bytes.Equal(c["summary.json"], d["summary.json"]) {
		t.Error("summary.json after the resubmission differs from the local run")
	}
}
