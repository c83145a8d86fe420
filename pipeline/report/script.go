package report

import (
	"math"
	"strings"

	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
)

// scriptText is a text.Handler for figure labels with sub- and
// superscripts: "θ_1(L)", "L^{−y}", "e^{−NΔf}". A script is one rune after
// _ or ^, or a braced group; it is drawn at scriptScale of the size, raised
// or lowered by a fraction of it (but never below MinFontSize). Greek letters and other symbols are
// plain Unicode. (The library's own LaTeX handler renders neither scripts
// nor |·|.)
type scriptText struct {
	Fonts *font.Cache
}

var _ text.Handler = scriptText{}

const (
	scriptScale = 0.8  // never below MinFontSize
	supRaise    = 0.42 // of the base size
	subDrop     = 0.18
)

// run is a piece of a label at one script level (+1 superscript, −1
// subscript, 0 base line).
type run struct {
	s     string
	level int
}

func parseScripts(txt string) []run {
	var out []run
	var cur strings.Builder
	flush := func(level int) {
		if cur.Len() > 0 {
			out = append(out, run{cur.String(), level})
			cur.Reset()
		}
	}
	rs := []rune(txt)
	for i := 0; i < len(rs); i++ {
		r := rs[i]
		if (r == '_' || r == '^') && i+1 < len(rs) {
			flush(0)
			level := 1
			if r == '_' {
				level = -1
			}
			if rs[i+1] == '{' {
				j := i + 2
				for j < len(rs) && rs[j] != '}' {
					j++
				}
				out = append(out, run{string(rs[i+2 : min(j, len(rs))]), level})
				i = j
			} else {
				out = append(out, run{string(rs[i+1]), level})
				i++
			}
			continue
		}
		cur.WriteRune(r)
	}
	flush(0)
	return out
}

func (h scriptText) Cache() *font.Cache { return h.Fonts }

func (h scriptText) Extents(fnt font.Font) font.Extents {
	f := h.Fonts.Lookup(fnt, fnt.Size)
	return f.Extents()
}

func (h scriptText) Lines(txt string) []string {
	return strings.Split(strings.TrimRight(txt, "\n"), "\n")
}

func (h scriptText) face(fnt font.Font, level int) *font.Face {
	size := fnt.Size
	if level != 0 {
		size = max(vg.Length(float64(size)*scriptScale), vg.Points(MinFontSize))
	}
	f := h.Fonts.Lookup(fnt, size)
	return &f
}

func (h scriptText) Box(txt string, fnt font.Font) (width, height, depth vg.Length) {
	ext := h.Extents(fnt)
	height, depth = ext.Ascent, ext.Descent
	for _, r := range parseScripts(txt) {
		f := h.face(fnt, r.level)
		width += f.Width(r.s)
		switch r.level {
		case 1:
			height = vg.Length(math.Max(float64(height), float64(f.Extents().Ascent+fnt.Size*supRaise)))
		case -1:
			depth = vg.Length(math.Max(float64(depth), float64(f.Extents().Descent+fnt.Size*subDrop)))
		}
	}
	return width, height, depth
}

func (h scriptText) Draw(c vg.Canvas, txt string, sty text.Style, pt vg.Point) {
	txt = strings.TrimRight(txt, "\n")
	if txt == "" {
		return
	}
	c.SetColor(sty.Color)
	if sty.Rotation != 0 {
		c.Push()
		c.Rotate(sty.Rotation)
	}
	sin64, cos64 := math.Sincos(sty.Rotation)
	cos, sin := vg.Length(cos64), vg.Length(sin64)
	pt.X, pt.Y = pt.Y*sin+pt.X*cos, pt.Y*cos-pt.X*sin
	base := h.face(sty.Font, 0)
	lines := h.Lines(txt)
	ht := sty.Height(txt)
	pt.Y += ht*vg.Length(sty.YAlign) - base.Extents().Ascent
	for i, line := range lines {
		w, _, _ := h.Box(line, sty.Font)
		x := pt.X + vg.Length(sty.XAlign)*w
		y := pt.Y + vg.Length(len(lines)-i)*sty.Font.Size
		for _, r := range parseScripts(line) {
			f := h.face(sty.Font, r.level)
			dy := vg.Length(0)
			switch r.level {
			case 1:
				dy = sty.Font.Size * supRaise
			case -1:
				dy = -sty.Font.Size * subDrop
			}
			c.FillString(*f, vg.Point{X: x, Y: y + dy}, r.s)
			x += f.Width(r.s)
		}
	}
	if sty.Rotation != 0 {
		c.Pop()
	}
}
