package pipeline

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

func readSummary(t *testing.T, out string) Summary {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(out, "summary.json"))
	if err != nil {
		t.Fatal(err)
	}
	var s Summary
	if err := json.Unmarshal(b, &s); err != nil {
		t.Fatal(err)
	}
	return s
}

// The bundled demo end to end: every resolved first zero agrees with the
// exact ring zero (closed form, PHYSICS.md) within 3σ, and the scaling fit
// of the Monte Carlo zeros agrees with the same fit on the exact zeros of
// the same sizes within 2σ, both near θ_c = arcsin(e^{−2β}).
func TestDemoAgainstExact(t *testing.T) {
	if testing.Short() {
		t.Skip("long physics run")
	}
	dir := t.TempDir()
	out := filepath.Join(dir, "out")
	code, _, stderr := runCLI(t, "run", filepath.Join("..", "configs", "ring-demo.toml"), "--out", out, "--cache", filepath.Join(dir, "cache"))
	if code != 0 {
		t.Fatal(stderr)
	}
	s := readSummary(t, out)
	resolved := 0
	for _, b := range s.Branches {
		if b.FirstZero == nil {
			continue
		}
		resolved++
		if p := (b.FirstZero.Value - *b.ExactFirstZero) / b.FirstZero.Error; math.Abs(p) > 3 {
			t.Errorf("%s: first zero %v ± %v, exact %v", b.Dir, b.FirstZero.Value, b.FirstZero.Error, *b.ExactFirstZero)
		}
	}
	if resolved < 4 {
		t.Fatalf("only %d zeros resolved", resolved)
	}
	sc := s.Scaling[0]
	if sc.ThetaC == nil || sc.ExactFitThetaC == nil || sc.ExactThetaC == nil {
		t.Fatalf("scaling incomplete: %+v", sc)
	}
	if d := math.Abs(sc.ThetaC.Value - *sc.ExactFitThetaC); d > 2*sc.ThetaC.Error {
		t.Errorf("θ_c = %v ± %v, the same fit on exact zeros %v", sc.ThetaC.Value, sc.ThetaC.Error, *sc.ExactFitThetaC)
	}
	if d := math.Abs(sc.ThetaC.Value - *sc.ExactThetaC); d > 0.01 {
		t.Errorf("θ_c = %v far from the exact edge %v", sc.ThetaC.Value, *sc.ExactThetaC)
	}
}
