package pipeline

import (
	"errors"
	"strings"
	"testing"
)

func TestBadStudies(t *testing.T) {
	cases := []struct {
		name, text string
		sets       []string
		want       []string // substrings of the error, all required
	}{
		{"syntax", "name = \"x\"\n[model]\ndimension = = 1", nil, []string{"bad.toml", "line 3"}},
		{"type", "[model]\ndimension = \"one\"\nsizes=[4]\nbetas=[0.1]", nil, []string{"bad.toml"}},
		{"unknown keys", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]\ncolour = 3\n[sampel]\nx=1", nil,
			[]string{"model.colour: unknown key", "sampel"}},
		{"no model", "name = \"x\"", nil, []string{"model: the [model] table is required"}},
		{"negative beta", "[model]\ndimension = 1\nsizes=[4]\nbetas=[-0.1]", nil, []string{"model.betas", "≥ 0"}},
		{"small L", "[model]\ndimension = 2\nsizes=[1]\nbetas=[0.1]", nil, []string{"model.sizes", "≥ 2"}},
		{"bad dimension", "[model]\ndimension = 4\nsizes=[4]\nbetas=[0.1]", nil, []string{"model.dimension"}},
		{"theta range", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]\n[transform]\ntheta_max = 2.0", nil,
			[]string{"transform.theta_max", "[0, π/2]"}},
		{"few sweeps", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]\n[sample]\nsweeps = 999", nil,
			[]string{"sample.sweeps", "1000"}},
		{"estimator", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]\n[sample]\nestimator = \"magic\"", nil,
			[]string{"sample.estimator"}},
		{"name with path", "name = \"../x\"\n[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]", nil, []string{"name:"}},
		{"all at once", "[model]\ndimension = 1\nsizes=[1]\nbetas=[-1]\n[sample]\nsweeps=10", nil,
			[]string{"model.sizes", "model.betas", "sample.sweeps"}},
		{"set unknown", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]", []string{"model.colour=3"},
			[]string{"--set model.colour=3", "unknown key"}},
		{"set invalid", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]", []string{"model.betas=[-1.0]"},
			[]string{"model.betas"}},
		{"set malformed", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]", []string{"nonsense"},
			[]string{"--set nonsense", "dotted.key=value"}},
		{"bad exponent", "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]\n[scaling]\nexponent = \"fixed\"", nil,
			[]string{"scaling.exponent"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := ParseStudy("bad.toml", []byte(c.text), c.sets)
			if err == nil {
				t.Fatal("accepted")
			}
			var p *Problems
			if !errors.As(err, &p) {
				t.Fatalf("error %T is not *Problems", err)
			}
			for _, w := range c.want {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("error %q lacks %q", err, w)
				}
			}
		})
	}
}

func TestSetValues(t *testing.T) {
	base := "[model]\ndimension = 1\nsizes=[4]\nbetas=[0.1]\n"
	st, err := ParseStudy("s.toml", []byte(base), []string{"model.sizes=[8,16]", "sample.estimator=bennett",
		"transform.theta_max = 0.25", "name=other", "scaling.exponent=2"})
	if err != nil {
		t.Fatal(err)
	}
	if len(st.Model.Sizes) != 2 || st.Model.Sizes[1] != 16 || st.Sample.Estimator != "bennett" ||
		st.Transform.ThetaMax != 0.25 || st.Name != "other" || st.Scaling.Exponent != 2.0 {
		t.Errorf("overrides not applied: %+v", st)
	}
}

func TestBadStudyExitCode(t *testing.T) {
	dir := t.TempDir()
	p := writeStudy(t, dir, "bad.toml", "[model]\ndimension = 9")
	code, _, stderr := runCLI(t, "run", p)
	if code != 2 || !strings.Contains(stderr, "bad.toml") {
		t.Errorf("exit %d, stderr %q", code, stderr)
	}
}

// FuzzParseStudy: the loader never panics, and an accepted study
// round-trips: its canonical form is stable under reloading.
func FuzzParseStudy(f *testing.F) {
	f.Add([]byte(tinyStudy))
	f.Add([]byte(tinyReordered))
	f.Add([]byte("[model]\ndimension = 2\nsizes=[4]\nbetas=[0.3]\n[[expect]]\nquantity=\"reach\"\nvalue=0.1\nsigma=3"))
	f.Fuzz(func(t *testing.T, data []byte) {
		st, err := ParseStudy("fuzz.toml", data, nil)
		if err != nil {
			return
		}
		a, _ := st.Canonical()
		st2, err := ParseStudy("fuzz.toml", data, nil)
		if err != nil {
			t.Fatal("second parse failed")
		}
		b, _ := st2.Canonical()
		if string(a) != string(b) {
			t.Fatal("canonical form not stable")
		}
	})
}

// FuzzParseSet: the --set parser never panics and what it accepts is a
// TOML document that sets exactly the named key.
func FuzzParseSet(f *testing.F) {
	for _, s := range []string{"model.sizes=[8,16]", "sample.estimator=bennett", "a=1", "x.y.z=\"q\"", "=", "a.=b", "k=[1,"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		doc, err := ParseSet(s)
		if err != nil {
			return
		}
		var m map[string]any
		if _, err := tomlDecode(doc, &m); err != nil {
			t.Fatalf("ParseSet(%q) produced invalid TOML %q: %v", s, doc, err)
		}
	})
}
