package pipeline

import (
	"bytes"
	"encoding/csv"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"strata/cache"
)

func readCSV(t *testing.T, path string) map[string][]float64 {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	out := map[string][]float64{}
	for _, r := range rows[1:] {
		for j, h := range rows[0] {
			v, err := strconv.ParseFloat(r[j], 64)
			if err != nil {
				t.Fatalf("%s: %v", path, err)
			}
			out[h] = append(out[h], v)
		}
	}
	return out
}

func sameFloats(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] && !(a[i] != a[i] && b[i] != b[i]) {
			return false
		}
	}
	return true
}

// The figures are drawn from exactly the arrays written to the CSV files.
func TestFiguresUseCSVArrays(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(e)
	}
	st, _ := LoadStudy(study, nil)
	plan := BuildPlan(st)
	c, _ := cache.Open(filepath.Join(dir, ".strata-cache"))
	res := LoadResults(c, plan)
	b := plan.Branches[1]
	figs := res.branchFigures(b, res.branchTables(b))
	tr := readCSV(t, filepath.Join(out, b.Branch.Dir(), "transform.csv"))
	dens := readCSV(t, filepath.Join(out, b.Branch.Dir(), "density.csv"))
	checked := 0
	for _, f := range figs {
		for _, p := range f.Panels {
			for _, s := range p.Series {
				switch {
				case strings.HasSuffix(f.Name, "_im_m") && s.Label == "Monte Carlo ± σ":
					if !sameFloats(s.X, tr["theta"]) || !sameFloats(s.Y, tr["im_m"]) || !sameFloats(s.Err, tr["im_m_err"]) {
						t.Error("Im m figure differs from transform.csv")
					}
					checked++
				case strings.HasSuffix(f.Name, "_sign") && s.Label == "Monte Carlo ± σ":
					if !sameFloats(s.Err, tr["sign_err"]) || !sameFloats(s.Y, abs(tr["sign"])) {
						t.Error("sign figure differs from transform.csv")
					}
					checked++
				case strings.HasSuffix(f.Name, "_density") && s.Label == "Monte Carlo":
					if !sameFloats(s.Y, dens["ln_rho"]) || !sameFloats(s.Err, dens["ln_rho_err"]) || !sameFloats(s.X, dens["M"]) {
						t.Error("density figure differs from density.csv")
					}
					checked++
				case strings.HasSuffix(f.Name, "_density") && s.Label == "exact":
					if !sameFloats(s.Y, dens["ln_rho_exact"]) {
						t.Error("exact density differs from density.csv")
					}
					checked++
				}
			}
		}
	}
	if checked != 4 {
		t.Errorf("checked %d series, want 4", checked)
	}
	for _, name := range []string{"report.html", "figures/reach.svg", "figures/reach.png", "figures/scaling_beta0.4.png"} {
		if _, err := os.Stat(filepath.Join(out, name)); err != nil {
			t.Error(err)
		}
	}
}

// A real browser renders report.html: the screenshot is not blank and no
// image on the page is broken. Skipped (with the reason) where chromium is
// not installed; .ci/run installs it.
func TestReportInBrowser(t *testing.T) {
	browser := ""
	for _, name := range []string{"chromium", "chromium-browser"} {
		if p, err := exec.LookPath(name); err == nil {
			browser = p
			break
		}
	}
	if browser == "" {
		t.Skip("chromium is not installed; .ci/run installs Debian's chromium")
	}
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(e)
	}
	page := "file://" + filepath.Join(out, "report.html")
	flags := []string{"--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
		"--disable-component-update", "--disable-sync"}
	shot := filepath.Join(dir, "shot.png")
	cmd := exec.Command(browser, append(flags, "--user-data-dir="+t.TempDir(), "--window-size=1100,1400", "--screenshot="+shot, page)...)
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("screenshot: %v\n%s", err, b)
	}
	f, err := os.Open(shot)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(f)
	f.Close()
	if err != nil {
		t.Fatal(err)
	}
	colours := map[[4]uint32]bool{}
	bounds := img.Bounds()
	for y := bounds.Min.Y; y < bounds.Max.Y; y += 2 {
		for x := bounds.Min.X; x < bounds.Max.X; x += 2 {
			r, g, b, a := img.At(x, y).RGBA()
			colours[[4]uint32{r, g, b, a}] = true
		}
	}
	if len(colours) < 50 {
		t.Errorf("screenshot has only %d distinct colours: blank page?", len(colours))
	}
	dom, err := exec.Command(browser, append(flags, "--user-data-dir="+t.TempDir(), "--dump-dom", page)...).Output()
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(dom, []byte(`data-broken-images="0"`)) || bytes.Contains(dom, []byte(`data-images="0"`)) {
		i := bytes.Index(dom, []byte("<body"))
		t.Errorf("images on the page: %.120s", dom[i:])
	}
}
