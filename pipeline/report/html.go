package report

import (
	"bytes"
	"encoding/base64"
	"html/template"
)

// Rendered is a drawn figure.
type Rendered struct {
	Name string
	SVG  []byte
}

// BranchRow is one line of the summary table.
type BranchRow struct {
	Dir, Size, Beta, FirstZero, Exact, Reach string
}

// ScalingRow is one β of the scaling table.
type ScalingRow struct {
	Beta, ThetaC, Exponent, Chi2, Sizes, Exact, Note string
}

// RouteRow is one route of one branch in the routes table.
type RouteRow struct {
	Dir, Route, FirstZero, Exact, Order, Truncation, BiasOnset string
}

// ComparisonRow is one representation of one (L, β) in the comparison
// table.
type ComparisonRow struct {
	Size, Beta, Theta, Sectors, FirstZero, Reach, CPU, SignErr, SigmaSqrtCPU string
}

// NodeRow is one node of the provenance table.
type NodeRow struct {
	Stage, Branch, Label, Key, Status string
}

// Page is everything the report shows.
type Page struct {
	Name, Tool, Version, StudyHash, StudyText string
	Dimension                                 int
	Branches                                  []BranchRow
	Scaling                                   []ScalingRow
	Routes                                    []RouteRow
	Comparison                                []ComparisonRow
	Figures                                   []Rendered
	Nodes                                     []NodeRow
}

var page = template.Must(template.New("report").Funcs(template.FuncMap{
	"datauri": func(b []byte) template.URL {
		return template.URL("data:image/svg+xml;base64," + base64.StdEncoding.EncodeToString(b))
	},
}).Parse(`<!DOCTYPE html>
<html lang="en"><head><meta charset="utf-8">
<title>{{.Name}} — strata report</title>
<style>
body{font-family:sans-serif;max-width:1000px;margin:2em auto;color:#222;background:#fff}
table{border-collapse:collapse;margin:1em 0}td,th{border:1px solid #bbb;padding:3px 8px;text-align:left}
th{background:#e8eef6}figure{display:inline-block;margin:6px;vertical-align:top}img{width:460px;border:1px solid #ddd}
pre{background:#f4f4f4;padding:1em;overflow:auto}.small{font-size:80%}
</style></head>
<body>
<h1>{{.Name}}</h1>
<p>Ising model on the periodic hypercubic lattice, d = {{.Dimension}}, at imaginary field h = iθ (h = βH dimensionless, J = 1).
sign = Z(β,iθ)/Z(β,0); Im m = Im⟨M⟩/N per site.</p>
<h2>Results</h2>
<table><tr><th>branch</th><th>L</th><th>β</th><th>first zero θ₁</th><th>exact θ₁</th><th>reach</th></tr>
{{range .Branches}}<tr><td>{{.Dir}}</td><td>{{.Size}}</td><td>{{.Beta}}</td><td>{{.FirstZero}}</td><td>{{.Exact}}</td><td>{{.Reach}}</td></tr>
{{end}}</table>
{{if .Scaling}}<h2>Finite-size scaling θ₁(L) = θ_c + a L^−y</h2>
<table><tr><th>β</th><th>θ_c</th><th>y</th><th>χ²/dof</th><th>sizes</th><th>exact θ_c</th><th>note</th></tr>
{{range .Scaling}}<tr><td>{{.Beta}}</td><td>{{.ThetaC}}</td><td>{{.Exponent}}</td><td>{{.Chi2}}</td><td>{{.Sizes}}</td><td>{{.Exact}}</td><td>{{.Note}}</td></tr>
{{end}}</table>{{end}}
{{if .Routes}}<h2>Routes from ρ(M) to the first zero, on the same samples</h2>
<table><tr><th>branch</th><th>route</th><th>first zero</th><th>exact θ₁</th><th>order</th><th>truncation</th><th>bias onset (MC, exact)</th></tr>
{{range .Routes}}<tr><td>{{.Dir}}</td><td>{{.Route}}</td><td>{{.FirstZero}}</td><td>{{.Exact}}</td><td>{{.Order}}</td><td>{{.Truncation}}</td><td>{{.BiasOnset}}</td></tr>
{{end}}</table>{{end}}
{{if .Comparison}}<h2>Representations compared: magnetization and monomer sectors</h2>
<p class="small">σ_sign is the sign's error at the common θ (the smaller of the two reaches); σ·√cpu multiplies it by √(CPU seconds of the samples): the CPU time to reach a given error scales as its square, so the lower value wins.</p>
<table><tr><th>L</th><th>β</th><th>θ</th><th>sectors</th><th>first zero</th><th>reach</th><th>CPU s</th><th>σ_sign</th><th>σ·√cpu</th></tr>
{{range .Comparison}}<tr><td>{{.Size}}</td><td>{{.Beta}}</td><td>{{.Theta}}</td><td>{{.Sectors}}</td><td>{{.FirstZero}}</td><td>{{.Reach}}</td><td>{{.CPU}}</td><td>{{.SignErr}}</td><td>{{.SigmaSqrtCPU}}</td></tr>
{{end}}</table>{{end}}
<h2>Figures</h2>
{{range .Figures}}<figure><img alt="{{.Name}}" src="{{datauri .SVG}}"><figcaption class="small">{{.Name}}</figcaption></figure>
{{end}}
<h2>Provenance</h2>
<p>{{.Tool}} {{.Version}}; study hash <code>{{.StudyHash}}</code></p>
<table class="small"><tr><th>stage</th><th>branch</th><th>node</th><th>key</th><th>status</th></tr>
{{range .Nodes}}<tr><td>{{.Stage}}</td><td>{{.Branch}}</td><td>{{.Label}}</td><td><code>{{.Key}}</code></td><td>{{.Status}}</td></tr>
{{end}}</table>
<h2>Study file</h2>
<pre>{{.StudyText}}</pre>
<script>
window.addEventListener("load", function () {
  var broken = 0, imgs = document.images;
  for (var i = 0; i < imgs.length; i++) { if (!imgs[i].complete || imgs[i].naturalWidth === 0) broken++; }
  document.body.setAttribute("data-images", imgs.length);
  document.body.setAttribute("data-broken-images", broken);
});
</script>
</body></html>
`))

// HTML renders the self-contained report.
func HTML(p Page) ([]byte, error) {
	var b bytes.Buffer
	if err := page.Execute(&b, p); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}
