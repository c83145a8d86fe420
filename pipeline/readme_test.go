package pipeline

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

var pythonBlock = regexp.MustCompile("(?s)<!-- python-example -->\\s*```python\\n(.*?)```")

// The README's Python example runs as written on a fresh run of a small
// study (its two paths swapped for that run's) and writes its PDF. Skipped
// with the reason where Debian's python3 with numpy, pandas and matplotlib
// is absent (.ci/run installs them).
func TestReadmePythonExample(t *testing.T) {
	py := "/usr/bin/python3" // Debian's, not another first on PATH
	if _, err := os.Stat(py); err != nil {
		t.Skip("no /usr/bin/python3")
	}
	if out, err := exec.Command(py, "-c", "import numpy, pandas, matplotlib").CombinedOutput(); err != nil {
		t.Skipf("python3 lacks numpy, pandas or matplotlib (apt-get install python3-numpy python3-pandas python3-matplotlib): %s", out)
	}
	readme, err := os.ReadFile(filepath.Join("..", "README.md"))
	if err != nil {
		t.Fatal(err)
	}
	m := pythonBlock.FindSubmatch(readme)
	if m == nil {
		t.Fatal("README.md has no <!-- python-example --> block")
	}
	code := string(m[1])
	if n := strings.Count(strings.TrimSpace(code), "\n") + 1; n > 12 {
		t.Errorf("the example has %d lines; keep it about ten", n)
	}
	dir := t.TempDir()
	study := writeStudy(t, dir, "tiny.toml", tinyStudy)
	out := filepath.Join(dir, "out")
	if c, _, e := runCLI(t, "run", study, "--out", out); c != 0 {
		t.Fatal(e)
	}
	old := `out, branch = "out/ring-demo", "L12_beta0.5"`
	if !strings.Contains(code, old) {
		t.Fatalf("the example no longer starts from %q", old)
	}
	code = strings.Replace(code, old, `out, branch = "`+out+`", "L8_beta0.4"`, 1)
	script := filepath.Join(dir, "example.py")
	if err := os.WriteFile(script, []byte(code), 0o644); err != nil {
		t.Fatal(err)
	}
	if b, err := exec.Command(py, script).CombinedOutput(); err != nil {
		t.Fatalf("README example failed: %v\n%s", err, b)
	}
	if st, err := os.Stat(filepath.Join(out, "L8_beta0.4_sign_redrawn.pdf")); err != nil || st.Size() < 1000 {
		t.Errorf("no redrawn PDF: %v", err)
	}
}
