package pipeline

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
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

// SIGTERM and SIGINT stop a run cleanly: exit 143 or 130 within a few
// seconds, a message naming the saved shards, none of the process's temp
// files left in the cache, no output folder written; the rerun resumes.
func TestSignalsStopCleanly(t *testing.T) {
	if testing.Short() {
		t.Skip("signals a real sampling process; skipped with -short")
	}
	for _, c := range []struct {
		sig  syscall.Signal
		code int
	}{{syscall.SIGTERM, 143}, {syscall.SIGINT, 130}} {
		dir := t.TempDir()
		study := writeStudy(t, dir, "big.toml", "name = \"big\"\n[model]\ndimension = 2\nsizes = [16]\nbetas = [0.3]\n[sample]\nsweeps = 4000\n")
		cacheDir, out := filepath.Join(dir, "cache"), filepath.Join(dir, "out")
		cmd := exec.Command(os.Args[0], "run", study, "--jobs", "2", "--cache", cacheDir, "--out", out)
		cmd.Env = append(os.Environ(), "STRATA_TEST_AS_MAIN=1")
		var stderr strings.Builder
		cmd.Stderr = &stderr
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		deadline := time.Now().Add(60 * time.Second)
		for countIndexEntries(cacheDir) < 10 {
			if time.Now().After(deadline) {
				cmd.Process.Kill()
				t.Fatal("no shards written in 60 s")
			}
			time.Sleep(5 * time.Millisecond)
		}
		sent := time.Now()
		cmd.Process.Signal(c.sig)
		err := cmd.Wait()
		code := cmd.ProcessState.ExitCode()
		if err == nil || code != c.code {
			t.Fatalf("%v: exit %d (%v), want %d; stderr %s", c.sig, code, err, c.code, stderr.String())
		}
		if d := time.Since(sent); d > 4*time.Second {
			t.Errorf("%v: took %v to stop", c.sig, d)
		}
		if !strings.Contains(stderr.String(), "rerun the same command to resume") {
			t.Errorf("%v: stderr %q", c.sig, stderr.String())
		}
		temps, _ := filepath.Glob(filepath.Join(cacheDir, "??", ".tmp-*"))
		if len(temps) > 0 {
			t.Errorf("%v: temp files left: %v", c.sig, temps)
		}
		if _, err := os.Stat(filepath.Join(out, "summary.json")); err == nil {
			t.Errorf("%v: an interrupted run wrote outputs", c.sig)
		}
		if code, _, e := runCLI(t, "run", study, "--stages", "sample", "--cache", cacheDir, "--out", out); code != 0 {
			t.Fatalf("rerun: %s", e)
		}
		if st := statusByStage(readManifest(t, out))["sample"]; st["cached"] < 10 {
			t.Errorf("%v: the rerun reused only %v", c.sig, st)
		}
	}
}

// Rerunning into an existing output folder leaves no temp file beside the
// samples and rewrites no unchanged sidecar.
func TestRerunLeavesNoTemps(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	for i := 0; i < 2; i++ {
		if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
			t.Fatal(e)
		}
	}
	var stray []string
	out, _ = filepath.EvalSymlinks(out)
	filepath.Walk(out, func(p string, info os.FileInfo, err error) error {
		if err == nil && (strings.HasSuffix(p, ".tmp") || strings.Contains(filepath.Base(p), ".tmp-")) {
			stray = append(stray, p)
		}
		return nil
	})
	if len(stray) > 0 {
		t.Errorf("%d stray temp files after a rerun, e.g. %s", len(stray), stray[0])
	}
}
