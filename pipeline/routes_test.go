package pipeline

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// [routes] writes cumulants.csv and routes.csv per branch and a routes list
// per branch in summary.json; changing a routes parameter reruns only the
// routes nodes.
func TestRoutesOutputs(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy+"\n[routes]\nenabled = true\nmax_order = 12\nfields = [0, 0.15]\n")
	out, cdir := filepath.Join(dir, "out"), filepath.Join(dir, "cache")
	if code, _, e := runCLI(t, "run", study, "--out", out, "--cache", cdir); code != 0 {
		t.Fatal(e)
	}
	heads := map[string]string{
		"L6_beta0.4/cumulants.csv": "h,order,kappa,kappa_err,theta1,theta1_err,theta1_trunc,re_h,kappa_exact,theta1_exact",
		"L6_beta0.4/routes.csv": "theta,sign_phase2,sign_phase2_err,sign_phase4,sign_phase4_err,sign_series2,sign_series2_err,sign_series4,sign_series4_err," +
			"sign_phase2_exact,sign_phase4_exact,sign_series2_exact,sign_series4_exact",
	}
	for f, h := range heads {
		b, err := os.ReadFile(filepath.Join(out, f))
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSpace(string(b)), "\n")
		if lines[0] != h {
			t.Errorf("%s header %q, want %q", f, lines[0], h)
		}
		if f == "L6_beta0.4/cumulants.csv" && len(lines) != 1+2*12 {
			t.Errorf("%s: %d rows, want 24", f, len(lines)-1)
		}
	}
	s := readSummary(t, out)
	var names []string
	for _, r := range s.Branches[0].Routes {
		names = append(names, r.Route)
	}
	if got, want := strings.Join(names, ","), "direct,cumulants_h0,cumulants_h0.15,phase2,phase4,series2,series4"; got != want {
		t.Errorf("routes %s, want %s", got, want)
	}
	code, _, e := runCLI(t, "run", study, "--out", out, "--cache", cdir, "--set", "routes.max_order=10")
	if code != 0 {
		t.Fatal(e)
	}
	for stage, st := range statusByStage(readManifest(t, out)) {
		if stage == "routes" && st["computed"] != 2 || stage != "routes" && st["computed"] != 0 {
			t.Errorf("after changing routes.max_order, stage %s: %v", stage, st)
		}
	}
	if code, stdout, _ := runCLI(t, "show", study, "--cache", cdir, "--set", "routes.max_order=10"); code != 0 || !strings.Contains(stdout, "cumulants_h0.15") {
		t.Errorf("show does not list the routes:\n%s", stdout)
	}
	if _, err := ParseStudy("x.toml", []byte(tinyStudy), []string{"routes.max_order=2"}); err == nil || !strings.Contains(err.Error(), "routes.max_order") {
		t.Errorf("max_order = 2: %v", err)
	}
}
