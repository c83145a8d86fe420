package pipeline

import (
	"encoding/json"
	"encoding/xml"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

const tinyExpect = tinyStudy + `
[[expect]]
branch = "L6_beta0.4"
quantity = "ln_rho"
M = 2
exact = true
sigma = 4

[[expect]]
size = 8
beta = 0.4
quantity = "sign"
theta = 0.2
exact = true
sigma = 4
`

func TestCheckExpectations(t *testing.T) {
	dir := t.TempDir()
	good := writeStudy(t, dir, "good.toml", tinyExpect)
	out := filepath.Join(dir, "out")
	junit := filepath.Join(dir, "report.xml")
	code, stdout, stderr := runCLI(t, "check", good, "--out", out, "--junit", junit)
	if code != 0 {
		t.Fatalf("check: exit %d\n%s\n%s", code, stdout, stderr)
	}
	if !strings.Contains(stdout, "2 passed, 0 failed") {
		t.Errorf("check output:\n%s", stdout)
	}
	// a deliberately shifted expectation fails
	shifted := writeStudy(t, dir, "shifted.toml", tinyStudy+`
[[expect]]
branch = "L6_beta0.4"
quantity = "ln_rho"
M = 2
value = 100.0
sigma = 3
`)
	code, stdout, _ = runCLI(t, "check", shifted, "--out", out, "--junit", junit)
	if code != 1 || !strings.Contains(stdout, "FAIL ln_rho L6_beta0.4 M=2") {
		t.Errorf("shifted expectation: exit %d\n%s", code, stdout)
	}
	// JUnit: testsuites/testsuite/testcase/failure with the usual attributes
	var doc struct {
		XMLName xml.Name `xml:"testsuites"`
		Suites  []struct {
			Name     string `xml:"name,attr"`
			Tests    int    `xml:"tests,attr"`
			Failures int    `xml:"failures,attr"`
			Cases    []struct {
				Name      string `xml:"name,attr"`
				Classname string `xml:"classname,attr"`
				Failure   *struct {
					Message string `xml:"message,attr"`
				} `xml:"failure"`
			} `xml:"testcase"`
		} `xml:"testsuite"`
	}
	b, _ := os.ReadFile(junit)
	if err := xml.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Suites) != 1 || doc.Suites[0].Tests != 1 || doc.Suites[0].Failures != 1 ||
		doc.Suites[0].Cases[0].Failure == nil || doc.Suites[0].Cases[0].Classname == "" ||
		!strings.Contains(doc.Suites[0].Cases[0].Failure.Message, "expected 100") {
		t.Errorf("JUnit structure: %+v", doc)
	}
	// bad expectations: exit 2
	for _, bad := range []string{
		"[[expect]]\nbranch = \"L7_beta0.4\"\nquantity = \"reach\"\nvalue = 0.1\nsigma = 3",
		"[[expect]]\nbranch = \"L6_beta0.4\"\nquantity = \"sign\"\ntheta = 0.123\nvalue = 0.1\nsigma = 3",
		"[[expect]]\nbranch = \"L6_beta0.4\"\nquantity = \"ln_rho\"\nM = 3\nvalue = 0.1\nsigma = 3",
		"[[expect]]\nquantity = \"theta_c\"\nbeta = 0.9\nvalue = 0.1\nsigma = 3",
	} {
		p := writeStudy(t, dir, "bad.toml", tinyStudy+bad)
		if code, _, stderr := runCLI(t, "check", p, "--out", out); code != 2 || !strings.Contains(stderr, "bad expectation") {
			t.Errorf("exit %d for %q: %s", code, bad, stderr)
		}
	}
}

func TestCheckBaseline(t *testing.T) {
	dir := t.TempDir()
	study := writeStudy(t, dir, "s.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if code, _, e := runCLI(t, "run", study, "--out", out); code != 0 {
		t.Fatal(e)
	}
	base := filepath.Join(dir, "base.json")
	b, _ := os.ReadFile(filepath.Join(out, "summary.json"))
	os.WriteFile(base, b, 0o644)
	if code, stdout, _ := runCLI(t, "check", study, "--out", out, "--baseline", base); code != 0 {
		t.Errorf("identical baseline: exit %d\n%s", code, stdout)
	}
	var s Summary
	json.Unmarshal(b, &s)
	moved := 0
	for i := range s.Branches {
		if fz := s.Branches[i].FirstZero; fz != nil {
			fz.Value += 10 * fz.Error
			moved++
		}
	}
	if moved == 0 {
		t.Fatal("no resolved zero to move")
	}
	mb, _ := json.Marshal(s)
	os.WriteFile(base, mb, 0o644)
	if code, stdout, _ := runCLI(t, "check", study, "--out", out, "--baseline", base); code != 1 || !strings.Contains(stdout, "FAIL baseline first_zero") {
		t.Errorf("moved first zero: exit %d\n%s", code, stdout)
	}
	// a zero that is resolved in the baseline but not now fails
	var cur Summary
	json.Unmarshal(b, &cur)
	outs := CompareBaseline(Summary{Branches: []BranchSummary{{Dir: "L6_beta0.4"}}}, cur, 3)
	vanished := false
	for _, o := range outs {
		if strings.Contains(o.Message, "vanished") && !o.Pass {
			vanished = true
		}
	}
	if !vanished {
		t.Error("a vanished zero was not a failure")
	}
}
