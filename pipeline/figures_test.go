package pipeline

import (
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"

	"strata/cache"
	"strata/pipeline/report"
)

// figureStudy has three sizes, an exact reference, a fit and the routes, so
// that every kind of figure is drawn.
const figureStudy = tinyStudy + `
[fit]
enabled = true
degrees = [2, 4]
[routes]
enabled = true
max_order = 8
fields = [0, 0.1]
`

func runFigureStudy(t *testing.T) (out string, res *Results) {
	t.Helper()
	dir := t.TempDir()
	study := writeStudy(t, dir, "fig.toml", strings.Replace(figureStudy, "sizes = [6, 8]", "sizes = [4, 6, 8]", 1))
	out = filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(e)
	}
	st, err := LoadStudy(study, nil)
	if err != nil {
		t.Fatal(err)
	}
	c, _ := cache.Open(filepath.Join(dir, ".strata-cache"))
	return out, LoadResults(c, BuildPlan(st))
}

// From the plot layout: no legend box covers a data point, an error bar, a
// band or a curve sample, and every legend lies inside the figure.
func TestLegendsHideNoData(t *testing.T) {
	_, res := runFigureStudy(t)
	var figs []report.Figure
	for _, b := range res.Plan.Branches {
		figs = append(figs, res.branchFigures(b, res.branchTables(b))...)
	}
	figs = append(figs, res.studyFigures()...)
	legends := 0
	for _, f := range figs {
		lay, err := f.Layout()
		if err != nil {
			t.Fatal(err)
		}
		w, h := f.Size()
		for i, p := range lay {
			if p.Legend.Size().X == 0 {
				continue
			}
			legends++
			r := p.Legend
			if r.Min.X < 0 || r.Min.Y < 0 || r.Max.X > w || r.Max.Y > h {
				t.Errorf("%s panel %d: legend %v outside the %v×%v figure", f.Name, i, r, w, h)
			}
			for _, q := range p.Data {
				if q.X >= r.Min.X && q.X <= r.Max.X && q.Y >= r.Min.Y && q.Y <= r.Max.Y {
					t.Errorf("%s panel %d: legend %v covers data at %v", f.Name, i, r, q)
					break
				}
			}
			if len(p.Data) == 0 {
				t.Errorf("%s panel %d: no data recorded", f.Name, i)
			}
		}
	}
	if legends < 10 {
		t.Errorf("only %d legends checked", legends)
	}
}

var strokeRe = regexp.MustCompile(`(?:stroke|fill):(#[0-9A-F]{6})`)

// A size keeps its colour in every file: each branch's SVG figures use
// that size's palette colour and no other size's.
func TestSizeColourAcrossFiles(t *testing.T) {
	out, res := runFigureStudy(t)
	sizes := map[int]string{4: "#0072B2", 6: "#D55E00", 8: "#009E73"} // Okabe–Ito, in size order
	for _, b := range res.Plan.Branches {
		files, _ := filepath.Glob(filepath.Join(out, "figures", b.Branch.Dir()+"_*.svg"))
		if len(files) < 5 {
			t.Fatalf("%s: %d figures", b.Branch.Dir(), len(files))
		}
		for _, f := range files {
			svg, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			used := map[string]bool{}
			for _, m := range strokeRe.FindAllStringSubmatch(string(svg), -1) {
				used[m[1]] = true
			}
			if strings.HasSuffix(f, "_cumulants.svg") {
				continue // fields, not sizes: black and greys
			}
			own := strings.HasSuffix(f, "_sign.svg") || strings.HasSuffix(f, "_density.svg") || strings.HasSuffix(f, "_im_m.svg")
			if own && !used[sizes[b.Branch.L]] {
				t.Errorf("%s lacks the colour %s of L=%d", filepath.Base(f), sizes[b.Branch.L], b.Branch.L)
			}
			for l, c := range sizes {
				if l != b.Branch.L && used[c] {
					t.Errorf("%s uses the colour %s of L=%d", filepath.Base(f), c, l)
				}
			}
		}
	}
	// the reach figure shows every size in its own colour
	svg, _ := os.ReadFile(filepath.Join(out, "figures", "reach.svg"))
	for l, c := range sizes {
		if !bytes.Contains(svg, []byte(c)) {
			t.Errorf("reach.svg lacks L=%d's colour %s", l, c)
		}
	}
}

var mediaBoxRe = regexp.MustCompile(`/MediaBox \[0 0 ([0-9.]+) ([0-9.]+)\]`)
var fontSizeRe = regexp.MustCompile(`font-size:([0-9.]+)px`)

// Every figure has a one-page PDF at one journal column (3.4 in = 244.8 pt)
// and no text below 7 pt; figures are re-rendered only when their content
// changed.
func TestFiguresForPrint(t *testing.T) {
	out, _ := runFigureStudy(t)
	pdfs, _ := filepath.Glob(filepath.Join(out, "figures", "*.pdf"))
	svgs, _ := filepath.Glob(filepath.Join(out, "figures", "*.svg"))
	if len(pdfs) == 0 || len(pdfs) != len(svgs) {
		t.Fatalf("%d PDF and %d SVG figures", len(pdfs), len(svgs))
	}
	for _, f := range pdfs {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		pages := bytes.Count(b, []byte("/Type /Page\n")) + bytes.Count(b, []byte("/Type /Page/")) + bytes.Count(b, []byte("/Type /Page "))
		m := mediaBoxRe.FindSubmatch(b)
		if pages != 1 || m == nil {
			t.Errorf("%s: %d pages, MediaBox %q", filepath.Base(f), pages, m)
			continue
		}
		if w, _ := strconv.ParseFloat(string(m[1]), 64); w != 244.8 {
			t.Errorf("%s: width %v pt, want 244.8 (3.4 in)", filepath.Base(f), w)
		}
	}
	for _, f := range svgs {
		b, _ := os.ReadFile(f)
		for _, m := range fontSizeRe.FindAllSubmatch(b, -1) {
			if v, _ := strconv.ParseFloat(string(m[1]), 64); v < report.MinFontSize {
				t.Errorf("%s: text at %v pt", filepath.Base(f), v)
			}
		}
	}
	// a rerun with nothing changed leaves every figure file untouched
	before := map[string]time.Time{}
	for _, f := range append(pdfs, svgs...) {
		st, _ := os.Stat(f)
		before[f] = st.ModTime()
	}
	time.Sleep(20 * time.Millisecond)
	study := filepath.Join(filepath.Dir(out), "fig.toml")
	if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(e)
	}
	for f, mt := range before {
		if st, _ := os.Stat(f); !st.ModTime().Equal(mt) {
			t.Errorf("%s rewritten although unchanged", filepath.Base(f))
		}
	}
}

// Grid values carry no float noise: every θ in the CSV files and in
// `strata exact` is the formula's value rounded to 12 significant digits.
func TestGridValuesClean(t *testing.T) {
	out, _ := runFigureStudy(t)
	check := func(where string, tokens []string) {
		for _, tok := range tokens {
			x, err := strconv.ParseFloat(tok, 64)
			if err != nil {
				t.Fatalf("%s: %q", where, tok)
			}
			if y, _ := strconv.ParseFloat(strconv.FormatFloat(x, 'g', 12, 64), 64); y != x {
				t.Errorf("%s: θ = %s carries float noise", where, tok)
			}
			if len(tok) > 14 {
				t.Errorf("%s: θ = %s", where, tok)
			}
		}
	}
	for _, f := range []string{"L6_beta0.4/transform.csv", "L6_beta0.4/routes.csv"} {
		b, err := os.ReadFile(filepath.Join(out, f))
		if err != nil {
			t.Fatal(err)
		}
		var col []string
		for _, line := range strings.Split(strings.TrimSpace(string(b)), "\n")[1:] {
			col = append(col, strings.SplitN(line, ",", 2)[0])
		}
		if col[1] != "0.02" || col[len(col)-1] != "0.8" {
			t.Errorf("%s: θ column %v … %v", f, col[:3], col[len(col)-1])
		}
		check(f, col)
	}
	_, stdout, _ := runCLI(t, "exact", "--dimension", "1", "--size", "8", "--beta", "0.3", "--theta-min", "0.1", "--theta-max", "0.7", "--theta-points", "61")
	var col []string
	for _, line := range strings.Split(strings.TrimSpace(stdout), "\n") {
		if !strings.HasPrefix(line, "#") && !strings.HasPrefix(line, "theta") {
			col = append(col, strings.SplitN(line, ",", 2)[0])
		}
	}
	if len(col) != 61 || col[1] != "0.11" {
		t.Fatalf("strata exact grid: %v", col[:2])
	}
	check("strata exact", col)
}
