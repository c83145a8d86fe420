// Package report draws a study's figures (gonum.org/v1/plot) and writes a
// self-contained HTML report. It receives plain arrays, the same ones the
// pipeline writes to its CSV files, and knows nothing of the cache.
package report

import (
	"bytes"
	"fmt"
	"image/color"
	"math"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
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
	LegendLeft            bool
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

func (p Panel) build() (*plot.Plot, error) {
	pl := plot.New()
	pl.Title.Text = p.Title
	pl.X.Label.Text = p.XLabel
	pl.Y.Label.Text = p.YLabel
	pl.Legend.Top = true
	pl.Legend.Left = p.LegendLeft
	if p.LogY {
		pl.Y.Scale = plot.LogScale{}
		pl.Y.Tick.Marker = plot.TickerFunc(func(min, max float64) []plot.Tick {
			ts := plot.LogTicks{Prec: -1}.Ticks(min, max)
			for i := range ts {
				if ts[i].Label != "" {
					ts[i].Label = strconv.FormatFloat(ts[i].Value, 'g', 2, 64)
				}
			}
			return ts
		})
	}
	for _, s := range p.Series {
		c := col(s.Color)
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
						return nil, err
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
				return nil, err
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
			if s.Label != "" {
				pl.Legend.Add(s.Label, l)
			}
		case Points:
			xy := finiteXY(s.X, s.Y, p.LogY)
			if len(xy) == 0 {
				continue
			}
			sc, err := plotter.NewScatter(xy)
			if err != nil {
				return nil, err
			}
			sc.Color = c
			sc.Radius = vg.Points(1.8)
			sc.Shape = draw.CircleGlyph{}
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
						return nil, err
					}
					bars.Color = c
					pl.Add(bars)
				}
			}
			if s.Label != "" {
				pl.Legend.Add(s.Label, sc)
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
		mk := &vline{x: m.X, c: col(m.Color)}
		pl.Add(mk)
		if m.Label != "" {
			pl.Legend.Add(m.Label, mk)
		}
	}
	return pl, nil
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
	x float64
	c color.RGBA
}

func (v *vline) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	x := trX(v.x)
	c.StrokeLine2(v.style(), x, c.Min.Y, x, c.Max.Y)
}

func (v *vline) style() draw.LineStyle {
	return draw.LineStyle{Color: v.c, Width: vg.Points(1), Dashes: []vg.Length{vg.Points(1.5), vg.Points(1.5)}}
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

// Render draws the figure as "svg" or "png".
func (f *Figure) Render(format string) (out []byte, err error) {
	defer func() {
		// gonum/plot panics on some degenerate ranges; report, don't crash
		if r := recover(); r != nil {
			out, err = nil, fmt.Errorf("figure %s: %v", f.Name, r)
		}
	}()
	w := vg.Points(460)
	h := vg.Points(300)
	if len(f.Panels) > 1 {
		h = vg.Points(300 + 130*float64(len(f.Panels)-1))
	}
	var cv vg.CanvasWriterTo
	switch format {
	case "svg":
		cv = vgsvg.New(w, h)
	case "png":
		cv = vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(110))}
	default:
		return nil, fmt.Errorf("report: unknown format %q", format)
	}
	dc := draw.New(cv)
	var plots [][]*plot.Plot
	for _, p := range f.Panels {
		pl, err := p.build()
		if err != nil {
			return nil, fmt.Errorf("figure %s: %w", f.Name, err)
		}
		plots = append(plots, []*plot.Plot{pl})
	}
	if len(plots) == 1 {
		plots[0][0].Draw(dc)
	} else {
		tiles := draw.Tiles{Rows: len(plots), Cols: 1, PadY: vg.Points(6), PadTop: vg.Points(2),
			PadBottom: vg.Points(2), PadLeft: vg.Points(2), PadRight: vg.Points(6)}
		canvases := plot.Align(plots, tiles, dc)
		for i := range plots {
			plots[i][0].Draw(canvases[i][0])
		}
	}
	var buf bytes.Buffer
	if _, err := cv.WriteTo(&buf); err != nil {
		return nil, err
	}
	return buf.Bytes(), nil
}
