package pipeline

import (
	"os"
	"os/exec"
	"path/filepath"
	"syscall"
	"testing"
	"time"
)

// TestMain lets the test binary act as the strata command for tests that
// need a separate process (kill -9).
func TestMain(m *testing.M) {
	if os.Getenv("STRATA_TEST_AS_MAIN") == "1" {
		os.Exit(Main(os.Args[1:], os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

func countIndexEntries(dir string) int {
	m, _ := filepath.Glob(filepath.Join(dir, "??", "*-a"))
	return len(m)
}

func TestResumeAfterKill(t *testing.T) {
	if testing.Short() {
		t.Skip("kills a real sampling process; skipped with -short")
	}
	dir := t.TempDir()
	study := writeStudy(t, dir, "big.toml", `
name = "big"
[model]
dimension = 2
sizes = [16]
betas = [0.3]
[sample]
sweeps = 4000
`)
	cacheDir := filepath.Join(dir, "cache")
	cmd := exec.Command(os.Args[0], "run", study, "--stages", "sample", "--jobs", "1", "--cache", cacheDir, "--out", filepath.Join(dir, "out"))
	cmd.Env = append(os.Environ(), "STRATA_TEST_AS_MAIN=1")
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	deadline := time.Now().Add(60 * time.Second)
	for countIndexEntries(cacheDir) < 20 {
		if time.Now().After(deadline) {
			cmd.Process.Kill()
			t.Fatal("no shards written in 60 s")
		}
		time.Sleep(5 * time.Millisecond)
	}
	cmd.Process.Signal(syscall.SIGKILL)
	err := cmd.Wait()
	if err == nil {
		t.Skip("the run finished before it could be killed")
	}
	done := countIndexEntries(cacheDir)
	st, _ := LoadStudy(study, nil)
	total := len(BuildPlan(st).Branches[0].Samples)
	if done >= total {
		t.Skipf("all %d shards finished before the kill", total)
	}
	out := filepath.Join(dir, "out")
	code, _, stderr := runCLI(t, "run", study, "--stages", "sample", "--jobs", "2", "--cache", cacheDir, "--out", out)
	if code != 0 {
		t.Fatalf("resume: exit %d: %s", code, stderr)
	}
	st2 := statusByStage(readManifest(t, out))["sample"]
	if st2["cached"] < done || st2["computed"] != total-st2["cached"] || st2["computed"] == 0 {
		t.Errorf("resume: %v with %d of %d shards done before the kill", st2, done, total)
	}
	if code, _, _ := runCLI(t, "cache", "verify", "--cache", cacheDir); code != 0 {
		t.Error("cache damaged by the kill")
	}
}
