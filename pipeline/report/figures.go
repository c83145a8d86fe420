// Package report draws a study's figures (gonum.org/v1/plot) and writes a
// self-contained HTML report. It receives plain arrays, the same ones the
// pipeline writes to its CSV files, and knows nothing of the cache.
package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"regexp"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgpdf"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Kind selects how a series is drawn.
type Kind int

// Series kinds.
const (
	Points   Kind = iota // markers with error bars (Err may be nil)
	Line                 // a line
	Band                 // a line with a shaded ±Err band
	Dashed               // a dashed line
	Dotted               // a dotted line
	DashDot              // a dash-dotted line
	LongDash             // a long-dashed line
)

// Series is one data set of a panel.
type Series struct {
	Label string
	Kind  Kind
	X, Y  []float64
	Err   []float64
	Color int // index into the palette; the same size keeps the same colour
	Exact bool
	// Shade lightens the colour towards white (0: the colour itself, 0.8:
	// very light); fits and ladder rungs are told apart by lightness.
	Shade float64
	// Glyph, when > 0, picks marker shape Glyph−1 instead of the colour's
	// (series that are not sizes: fields, routes).
	Glyph int
}

// Mark is a vertical line at X.
type Mark struct {
	Label string
	X     float64
	Color int
}

// Panel is one plot.
type Panel struct {
	Title, XLabel, YLabel string
	LogY                  bool
	LegendLeft            bool    // unused: the legend goes where it hides no data
	YMin, YMax            float64 // axis limits when both are finite and YMax > YMin
	XMin, XMax            float64 // likewise for x
	Series                []Series
	Marks                 []Mark
}

// Figure is one or more panels stacked vertically, of equal heights.
type Figure struct {
	Name   string // file stem
	Panels []Panel
}

// palette: colour-blind-safe (Okabe and Ito, common practice).
var palette = []color.RGBA{
	{0, 114, 178, 255}, {213, 94, 0, 255}, {0, 158, 115, 255}, {204, 121, 167, 255},
	{230, 159, 0, 255}, {86, 180, 233, 255}, {0, 0, 0, 255}, {240, 228, 66, 255},
}

func col(i int) color.RGBA { return palette[((i%len(palette))+len(palette))%len(palette)] }

// shade mixes a colour with white.
func shade(c color.RGBA, f float64) color.RGBA {
	mix := func(v uint8) uint8 { return uint8(float64(v) + f*(255-float64(v)) + 0.5) }
	return color.RGBA{mix(c.R), mix(c.G), mix(c.B), 255}
}

// glyphs give each palette index (each size) its own marker shape, so the
// figures survive greyscale printing; exact references use a plus.
var glyphs = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}, draw.CrossGlyph{},
	draw.RingGlyph{}, draw.PyramidGlyph{}, draw.BoxGlyph{}, draw.PlusGlyph{}}

func glyph(s Series) draw.GlyphDrawer {
	if s.Exact {
		return draw.PlusGlyph{}
	}
	if s.Glyph > 0 {
		return glyphs[(s.Glyph-1)%len(glyphs)]
	}
	return glyphs[((s.Color%len(glyphs))+len(glyphs))%len(glyphs)]
}

// Journal column geometry: every figure is one column (3.4 in) wide, with
// text of at least 7 pt at that width.
const (
	ColumnWidth  = 3.4 * vg.Inch
	panelHeight  = 2.35 * vg.Inch
	extraPanel   = 1.25 * vg.Inch
	titleSize    = 8.5
	labelSize    = 8
	tickSize     = 7.5
	legendSize   = 7.5
	MinFontSize  = 7 // points, at ColumnWidth
	legendMargin = 2 // points between the legend box and the axes
)

// textHandler draws every label of a figure (sub- and superscripts).
var textHandler = scriptText{Fonts: font.DefaultCache}

// legendEntry is one line of a panel's legend.
type legendEntry struct {
	label string
	thumb plot.Thumbnailer
}

func finiteXY(x, y []float64, logY bool) plotter.XYs {
	var out plotter.XYs
	for i := range x {
		if i >= len(y) || math.IsNaN(y[i]) || math.IsInf(y[i], 0) || math.IsNaN(x[i]) || (logY && y[i] <= 0) {
			continue
		}
		out = append(out, plotter.XY{X: x[i], Y: y[i]})
	}
	return out
}

func (p Panel) build() (*plot.Plot, []legendEntry, error) {
	pl := plot.New()
	pl.Title.Text = p.Title
	pl.X.Label.Text = p.XLabel
	pl.Y.Label.Text = p.YLabel
	for _, ts := range []*text.Style{&pl.Title.TextStyle, &pl.X.Label.TextStyle, &pl.Y.Label.TextStyle,
		&pl.X.Tick.Label, &pl.Y.Tick.Label} {
		ts.Handler = textHandler
	}
	pl.Title.TextStyle.Font.Size = titleSize
	pl.X.Label.TextStyle.Font.Size = labelSize
	pl.Y.Label.TextStyle.Font.Size = labelSize
	pl.X.Tick.Label.Font.Size = tickSize
	pl.Y.Tick.Label.Font.Size = tickSize
	pl.Title.Padding = vg.Points(3)
	var legend []legendEntry
	if p.LogY {
		pl.Y.Scale = plot.LogScale{}
		pl.Y.Tick.Marker = plot.TickerFunc(func(min, max float64) []plot.Tick {
			var ts []plot.Tick
			for _, tk := range (plot.LogTicks{Prec: -1}).Ticks(min, max) {
				// ticks outside the range would still reserve room for their labels
				if tk.Value < min*(1-1e-9) || tk.Value > max*(1+1e-9) {
					continue
				}
				if tk.Label != "" {
					tk.Label = strconv.FormatFloat(tk.Value, 'g', 2, 64)
				}
				ts = append(ts, tk)
			}
			return ts
		})
	}
	for _, s := range p.Series {
		c := shade(col(s.Color), s.Shade)
		switch s.Kind {
		case Band:
			if s.Err != nil {
				var poly plotter.XYs
				for i := range s.X {
					lo := s.Y[i] - s.Err[i]
					if p.LogY {
						lo = math.Max(lo, s.Y[i]*1e-3)
					}
					if ok(s.X[i]) && ok(lo) && (!p.LogY || lo > 0) {
						poly = append(poly, plotter.XY{X: s.X[i], Y: lo})
					}
				}
				for i := len(s.X) - 1; i >= 0; i-- {
					hi := s.Y[i] + s.Err[i]
					if ok(s.X[i]) && ok(hi) && (!p.LogY || hi > 0) {
						poly = append(poly, plotter.XY{X: s.X[i], Y: hi})
					}
				}
				if len(poly) >= 3 {
					pg, err := plotter.NewPolygon(poly)
					if err != nil {
						return nil, nil, err
					}
					pg.Color = color.NRGBA{R: c.R, G: c.G, B: c.B, A: 70}
					pg.LineStyle.Width = 0
					pl.Add(pg)
				}
			}
			fallthrough
		case Line, Dashed, Dotted, DashDot, LongDash:
			xy := finiteXY(s.X, s.Y, p.LogY)
			if len(xy) == 0 {
				continue
			}
			l, err := plotter.NewLine(xy)
			if err != nil {
				return nil, nil, err
			}
			l.Color = c
			l.Width = vg.Points(1.2)
			switch s.Kind {
			case Dashed:
				l.Dashes = []vg.Length{vg.Points(4), vg.Points(2)}
			case Dotted:
				l.Dashes = []vg.Length{vg.Points(1), vg.Points(2)}
			case DashDot:
				l.Dashes = []vg.Length{vg.Points(5), vg.Points(2), vg.Points(1), vg.Points(2)}
			case LongDash:
				l.Dashes = []vg.Length{vg.Points(8), vg.Points(3)}
			}
			pl.Add(l)
			thumbs := legendThumb{l}
			if (s.Kind == Line || s.Kind == Band) && !s.Exact && (s.Color != 6 || s.Glyph > 0) && len(xy) > 1 {
				// sparse markers of the size's shape along the curve
				var marks plotter.XYs
				step := max(1, len(xy)/8)
				for i := step / 2; i < len(xy); i += step {
					marks = append(marks, xy[i])
				}
				sc, err := plotter.NewScatter(marks)
				if err != nil {
					return nil, nil, err
				}
				sc.Color, sc.Radius, sc.Shape = c, vg.Points(1.6), glyph(s)
				pl.Add(sc)
				thumbs = append(thumbs, sc)
			}
			if s.Label != "" {
				legend = append(legend, legendEntry{s.Label, thumbs})
			}
		case Points:
			xy := finiteXY(s.X, s.Y, p.LogY)
			if len(xy) == 0 {
				continue
			}
			sc, err := plotter.NewScatter(xy)
			if err != nil {
				return nil, nil, err
			}
			sc.Color = c
			sc.Radius = vg.Points(1.8)
			sc.Shape = glyph(s)
			pl.Add(sc)
			if s.Err != nil {
				var eb errPoints
				for i := range s.X {
					if ok(s.X[i]) && ok(s.Y[i]) && ok(s.Err[i]) && (!p.LogY || s.Y[i]-s.Err[i] > 0) {
						eb.xy = append(eb.xy, plotter.XY{X: s.X[i], Y: s.Y[i]})
						eb.err = append(eb.err, s.Err[i])
					}
				}
				if len(eb.xy) > 0 {
					bars, err := plotter.NewYErrorBars(eb)
					if err != nil {
						return nil, nil, err
					}
					bars.Color = c
					pl.Add(bars)
				}
			}
			if s.Label != "" {
				legend = append(legend, legendEntry{s.Label, sc})
			}
		}
	}
	if ok(p.YMin) && ok(p.YMax) && p.YMax > p.YMin {
		pl.Y.Min, pl.Y.Max = p.YMin, p.YMax
	}
	if p.LogY {
		if !(pl.Y.Min > 0 && pl.Y.Max >= pl.Y.Min && !math.IsInf(pl.Y.Max, 0)) {
			pl.Y.Min, pl.Y.Max = 1e-16, 1 // nothing positive to show
		}
		if pl.Y.Max <= pl.Y.Min*1.0001 { // a single value: open a decade each way
			pl.Y.Min, pl.Y.Max = pl.Y.Min/10, pl.Y.Max*10
		}
	}
	if ok(p.XMin) && ok(p.XMax) && p.XMax > p.XMin {
		pl.X.Min, pl.X.Max = p.XMin, p.XMax
	}
	if !(pl.X.Max >= pl.X.Min) || math.IsInf(pl.X.Min, 0) || math.IsInf(pl.X.Max, 0) {
		pl.X.Min, pl.X.Max = 0, 1
	}
	for _, m := range p.Marks {
		if !ok(m.X) {
			continue
		}
		mk := &vline{x: m.X, c: col(m.Color), dashes: markDashes[len(legend)%len(markDashes)]}
		pl.Add(mk)
		if m.Label != "" {
			legend = append(legend, legendEntry{m.Label, mk})
		}
	}
	return pl, legend, nil
}

// legendThumb draws several thumbnails on top of each other.
type legendThumb []plot.Thumbnailer

func (t legendThumb) Thumbnail(c *draw.Canvas) {
	for _, x := range t {
		x.Thumbnail(c)
	}
}

func ok(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

type errPoints struct {
	xy  plotter.XYs
	err []float64
}

func (e errPoints) Len() int                        { return len(e.xy) }
func (e errPoints) XY(i int) (float64, float64)     { return e.xy[i].X, e.xy[i].Y }
func (e errPoints) YError(i int) (float64, float64) { return e.err[i], e.err[i] }

// vline draws a dotted vertical line across the data area.
type vline struct {
	x      float64
	c      color.RGBA
	dashes []vg.Length
}

// markDashes tells the marks of one panel apart without colour.
var markDashes = [][]vg.Length{{vg.Points(1.5), vg.Points(1.5)}, {vg.Points(4), vg.Points(1.5), vg.Points(1), vg.Points(1.5)},
	{vg.Points(6), vg.Points(2)}, {vg.Points(0.8), vg.Points(2.5)}}

func (v *vline) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	x := trX(v.x)
	c.StrokeLine2(v.style(), x, c.Min.Y, x, c.Max.Y)
}

func (v *vline) style() draw.LineStyle {
	return draw.LineStyle{Color: v.c, Width: vg.Points(1), Dashes: v.dashes}
}

// Thumbnail implements plot.Thumbnailer for the legend.
func (v *vline) Thumbnail(c *draw.Canvas) {
	x := (c.Min.X + c.Max.X) / 2
	c.StrokeLine2(v.style(), x, c.Min.Y, x, c.Max.Y)
}

// DataRange makes the x position part of the axis range.
func (v *vline) DataRange() (xmin, xmax, ymin, ymax float64) {
	return v.x, v.x, math.Inf(1), math.Inf(-1)
}

// Size returns the figure's width and height.
func (f *Figure) Size() (w, h vg.Length) {
	h = panelHeight
	if len(f.Panels) > 1 {
		h += extraPanel * vg.Length(len(f.Panels)-1)
	}
	return ColumnWidth, h
}

// Render draws the figure as "svg", "png" or "pdf" (one page) at one
// journal column's width.
func (f *Figure) Render(format string) (out []byte, err error) {
	defer func() {
		// gonum/plot panics on some degenerate ranges; report, don't crash
		if r := recover(); r != nil {
			out, err = nil, fmt.Errorf("figure %s: %v", f.Name, r)
		}
	}()
	w, h := f.Size()
	var cv vg.CanvasWriterTo
	switch format {
	case "svg":
		cv = vgsvg.New(w, h)
	case "png":
		cv = vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(300))}
	case "pdf":
		pdf := vgpdf.New(w, h)
		pdf.EmbedFonts(true)
		cv = pdf
	default:
		return nil, fmt.Errorf("report: unknown format %q", format)
	}
	if _, err := f.draw(draw.New(cv)); err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if _, err := cv.WriteTo(&buf); err != nil {
		return nil, err
	}
	if format == "pdf" {
		return pdfDates.ReplaceAll(buf.Bytes(), []byte("${1}(D:19700101000000)")), nil
	}
	return buf.Bytes(), nil
}

// pdfDates matches the creation and modification dates that the PDF
// writer takes from the clock; they are fixed (same length, so the
// cross-reference offsets stay valid) to keep outputs bit-identical.
var pdfDates = regexp.MustCompile(`(/(?:CreationDate|ModDate) )\(D:[0-9]{14}\)`)

// PanelLayout is where a panel put its legend and its data, in canvas
// coordinates (points from the lower left corner).
type PanelLayout struct {
	Legend  vg.Rectangle // empty when the panel has no legend
	Outside bool         // no corner was free: the legend sits right of the axes
	Data    []vg.Point   // data points, error-bar ends, band and line samples
}

// Layout draws the figure (as SVG, discarded) and returns each panel's
// layout: what a test needs to check that no legend hides data.
func (f *Figure) Layout() ([]PanelLayout, error) {
	w, h := f.Size()
	return f.draw(draw.New(vgsvg.New(w, h)))
}

func (f *Figure) draw(dc draw.Canvas) ([]PanelLayout, error) {
	var plots [][]*plot.Plot
	var legends [][]legendEntry
	for _, p := range f.Panels {
		pl, leg, err := p.build()
		if err != nil {
			return nil, fmt.Errorf("figure %s: %w", f.Name, err)
		}
		plots = append(plots, []*plot.Plot{pl})
		legends = append(legends, leg)
	}
	canvasesOf := func(c draw.Canvas) []draw.Canvas {
		if len(plots) == 1 {
			return []draw.Canvas{c}
		}
		tiles := draw.Tiles{Rows: len(plots), Cols: 1, PadY: vg.Points(4), PadTop: vg.Points(2),
			PadBottom: vg.Points(2), PadLeft: vg.Points(2), PadRight: vg.Points(4)}
		al := plot.Align(plots, tiles, c)
		out := make([]draw.Canvas, len(al))
		for i := range al {
			out[i] = al[i][0]
		}
		return out
	}
	sty := text.Style{Font: font.From(plot.DefaultFont, legendSize), Handler: textHandler, Color: color.Black}
	m := vg.Points(legendMargin)
	// first pass: which panels find a free corner on the full width
	canvases := canvasesOf(dc)
	var strip vg.Length
	for i, pl := range plots {
		if len(legends[i]) == 0 {
			continue
		}
		if _, free := freeCorner(pl[0], f.Panels[i], legends[i], sty, canvases[i]); !free {
			w, _ := legendBox(legends[i], sty)
			strip = max(strip, w+2*m)
		}
	}
	// second pass: when some legend must go outside, every panel gives up
	// the same strip on the right (the axes stay aligned)
	inner := dc
	if strip > 0 {
		inner = draw.Crop(dc, 0, -strip, 0, 0)
		canvases = canvasesOf(inner)
	}
	out := make([]PanelLayout, len(plots))
	for i, pl := range plots {
		c := canvases[i]
		pl[0].Draw(c)
		da := pl[0].DataCanvas(c)
		out[i].Data = dataPoints(pl[0], f.Panels[i], da)
		if len(legends[i]) == 0 {
			continue
		}
		r, free := freeCorner(pl[0], f.Panels[i], legends[i], sty, c)
		if !free {
			w, h := legendBox(legends[i], sty)
			r = vg.Rectangle{Min: vg.Point{X: inner.Max.X + m, Y: da.Max.Y - h}, Max: vg.Point{X: inner.Max.X + m + w, Y: da.Max.Y}}
			out[i].Outside = true
		}
		drawLegend(dc, r, legends[i], sty)
		out[i].Legend = r
	}
	return out, nil
}

// freeCorner returns the legend box in the first corner of the panel's
// data area (top right, top left, bottom right, bottom left) that covers
// no data point, error bar, band or curve sample.
func freeCorner(pl *plot.Plot, p Panel, legend []legendEntry, sty text.Style, c draw.Canvas) (vg.Rectangle, bool) {
	w, h := legendBox(legend, sty)
	m := vg.Points(legendMargin)
	da := pl.DataCanvas(c)
	pts := dataPoints(pl, p, da)
	for _, corner := range [][2]bool{{true, false}, {true, true}, {false, false}, {false, true}} {
		top, left := corner[0], corner[1]
		r := vg.Rectangle{Min: vg.Point{X: da.Max.X - m - w, Y: da.Min.Y + m}}
		if left {
			r.Min.X = da.Min.X + m
		}
		if top {
			r.Min.Y = da.Max.Y - m - h
		}
		r.Max = vg.Point{X: r.Min.X + w, Y: r.Min.Y + h}
		if !covers(r, pts) {
			return r, true
		}
	}
	return vg.Rectangle{}, false
}

func covers(r vg.Rectangle, pts []vg.Point) bool {
	pad := vg.Points(1)
	for _, q := range pts {
		if q.X >= r.Min.X-pad && q.X <= r.Max.X+pad && q.Y >= r.Min.Y-pad && q.Y <= r.Max.Y+pad {
			return true
		}
	}
	return false
}

const thumbWidth = 14 // points

func legendEntryHeight(sty text.Style) vg.Length {
	e := sty.FontExtents()
	return e.Ascent + e.Descent
}

// legendBox returns the size of the legend box.
func legendBox(legend []legendEntry, sty text.Style) (w, h vg.Length) {
	for _, e := range legend {
		w = max(w, sty.Width(e.label))
	}
	gap := sty.Width(" ")
	w += vg.Points(thumbWidth) + gap + vg.Points(4)
	h = vg.Length(len(legend))*legendEntryHeight(sty) + vg.Points(3)
	return w, h
}

// drawLegend draws the entries in the box r over a white ground.
func drawLegend(c draw.Canvas, r vg.Rectangle, legend []legendEntry, sty text.Style) {
	c.FillPolygon(color.White, []vg.Point{r.Min, {X: r.Max.X, Y: r.Min.Y}, r.Max, {X: r.Min.X, Y: r.Max.Y}})
	eh := legendEntryHeight(sty)
	gap := sty.Width(" ")
	y := r.Max.Y - vg.Points(1.5)
	for _, e := range legend {
		icon := &draw.Canvas{Canvas: c.Canvas, Rectangle: vg.Rectangle{
			Min: vg.Point{X: r.Min.X + vg.Points(2), Y: y - eh}, Max: vg.Point{X: r.Min.X + vg.Points(2+thumbWidth), Y: y}}}
		e.thumb.Thumbnail(icon)
		c.FillText(sty, vg.Point{X: icon.Max.X + gap, Y: y - eh + sty.FontExtents().Descent}, e.label)
		y -= eh
	}
}

// dataPoints samples what a panel draws, in canvas coordinates, inside the
// data area: markers with their error-bar ends, curves at four points per
// segment, bands at five heights per grid point.
func dataPoints(pl *plot.Plot, p Panel, da draw.Canvas) []vg.Point {
	trX, trY := pl.Transforms(&da)
	var out []vg.Point
	add := func(x, y float64) {
		if !ok(x) || !ok(y) || (p.LogY && y <= 0) || x < pl.X.Min || x > pl.X.Max || y < pl.Y.Min || y > pl.Y.Max {
			return
		}
		out = append(out, vg.Point{X: trX(x), Y: trY(y)})
	}
	for _, s := range p.Series {
		xy := finiteXY(s.X, s.Y, p.LogY)
		switch s.Kind {
		case Points:
			for i := range s.X {
				if i < len(s.Y) && ok(s.X[i]) && ok(s.Y[i]) {
					add(s.X[i], s.Y[i])
					if s.Err != nil && ok(s.Err[i]) {
						add(s.X[i], s.Y[i]+s.Err[i])
						add(s.X[i], s.Y[i]-s.Err[i])
					}
				}
			}
			continue
		case Band:
			for i := range s.X {
				if i >= len(s.Err) || !ok(s.Y[i]) || !ok(s.Err[i]) {
					continue
				}
				lo, hi := s.Y[i]-s.Err[i], s.Y[i]+s.Err[i]
				if p.LogY {
					lo = math.Max(lo, s.Y[i]*1e-3)
				}
				for k := 0; k <= 4; k++ {
					add(s.X[i], lo+(hi-lo)*float64(k)/4)
				}
			}
		}
		for i := range xy {
			add(xy[i].X, xy[i].Y)
			if i+1 < len(xy) {
				for k := 1; k < 4; k++ {
					f := float64(k) / 4
					y := xy[i].Y + f*(xy[i+1].Y-xy[i].Y)
					if p.LogY {
						y = math.Exp(math.Log(xy[i].Y) + f*(math.Log(xy[i+1].Y)-math.Log(xy[i].Y)))
					}
					add(xy[i].X+f*(xy[i+1].X-xy[i].X), y)
				}
			}
		}
	}
	return out
}
