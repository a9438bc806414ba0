// Package chart draws the charts of a trained forest as SVG: the
// out-of-bag error against the number of trees, and the permutation
// importance of each feature. Both read what sawmill's trainer stores in
// the model's provenance (keys oob_curve and importance).
package chart

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"image/color"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"

	"github.com/sawmill-dev/sawmill/forest"
)

// File names of the charts, for folders that hold them.
const (
	CurveFile      = "oob-error.svg"
	ImportanceFile = "importance.svg"
)

// ErrNoProvenance means the model does not carry what a chart needs: it
// was not grown by sawmill train, or importance was skipped.
var ErrNoProvenance = errors.New("the model's provenance has no out-of-bag figures")

// Curve is the out-of-bag error after the first Trees[i] trees.
type Curve struct {
	Trees []int
	Error []float64
	// Regression makes the error a mean squared error, else a
	// misclassification rate.
	Regression bool
}

// Importance is the mean increase of a tree's out-of-bag error when a
// feature's values are permuted, per feature.
type Importance struct {
	Features   []string
	Increase   []float64
	Regression bool
}

// FromForest reads the curve and the importance from f's provenance. imp is
// nil when importance was not computed; the error is ErrNoProvenance when
// there is no curve.
func FromForest(f *forest.Forest) (curve *Curve, imp *Importance, err error) {
	if len(f.Provenance) == 0 {
		return nil, nil, ErrNoProvenance
	}
	var p struct {
		Curve *struct {
			Trees []int     `json:"trees"`
			Error []float64 `json:"error"`
		} `json:"oob_curve"`
		Importance *struct {
			Increase map[string]float64 `json:"increase"`
		} `json:"importance"`
	}
	if err := json.Unmarshal(f.Provenance, &p); err != nil {
		return nil, nil, fmt.Errorf("provenance: %v", err)
	}
	if p.Curve == nil || len(p.Curve.Trees) == 0 {
		return nil, nil, ErrNoProvenance
	}
	if len(p.Curve.Trees) != len(p.Curve.Error) {
		return nil, nil, fmt.Errorf("provenance: oob_curve has %d tree counts and %d errors", len(p.Curve.Trees), len(p.Curve.Error))
	}
	reg := f.Task == forest.Regression
	curve = &Curve{Trees: p.Curve.Trees, Error: p.Curve.Error, Regression: reg}
	if p.Importance != nil && len(p.Importance.Increase) > 0 {
		imp = &Importance{Regression: reg}
		for _, name := range f.Features { // model order, never map order
			if v, ok := p.Importance.Increase[name]; ok {
				imp.Features = append(imp.Features, name)
				imp.Increase = append(imp.Increase, v)
			}
		}
	}
	return curve, imp, nil
}

var (
	ink    = color.RGBA{R: 0x1f, G: 0x4e, B: 0x79, A: 0xff} // dark blue
	pale   = color.RGBA{R: 0x9d, G: 0xc3, B: 0xe6, A: 0xff}
	grey   = color.Gray{Y: 0xb0}
	red    = color.RGBA{R: 0xc0, G: 0x39, B: 0x2b, A: 0xff}
	width  = 6 * vg.Inch
	height = 4 * vg.Inch
)

// sans is Liberation Sans, which gonum/plot ships (codeberg.org/go-fonts/
// liberation) and measures text with; see render for what viewers use.
var sans = font.Font{Typeface: "Liberation", Variant: "Sans"}

func newPlot(title, x, y string) *plot.Plot {
	p := plot.New()
	for _, f := range []*font.Font{&p.Title.TextStyle.Font, &p.X.Label.TextStyle.Font, &p.Y.Label.TextStyle.Font,
		&p.X.Tick.Label.Font, &p.Y.Tick.Label.Font, &p.Legend.TextStyle.Font} {
		size := f.Size
		*f = sans
		f.Size = size * fontSlack
	}
	p.Title.Text = title
	p.Title.TextStyle.Font.Size = textSize(13)
	p.Title.Padding = vg.Points(8)
	p.X.Label.Text = x
	p.Y.Label.Text = y
	p.X.Label.Padding = vg.Points(4)
	p.Y.Label.Padding = vg.Points(4)
	return p
}

// SVG draws the curve: the error as a line with a dot at every recorded
// point, the y axis from 0, and the final error marked by a dashed line.
func (c *Curve) SVG() ([]byte, error) {
	if len(c.Trees) == 0 || len(c.Trees) != len(c.Error) {
		return nil, fmt.Errorf("chart: out-of-bag curve has %d tree counts and %d errors", len(c.Trees), len(c.Error))
	}
	title, unit := "Out-of-bag error by number of trees", "error rate (share misclassified)"
	if c.Regression {
		title, unit = "Out-of-bag mean squared error by number of trees", "out-of-bag mean squared error"
	}
	last := len(c.Trees) - 1
	p := newPlot(title, "number of trees", unit)
	pts := make(plotter.XYs, len(c.Trees))
	top := 0.0
	for i := range c.Trees {
		pts[i].X, pts[i].Y = float64(c.Trees[i]), c.Error[i]
		top = max(top, c.Error[i])
	}
	line, dots, err := plotter.NewLinePoints(pts)
	if err != nil {
		return nil, fmt.Errorf("chart: %v", err)
	}
	line.Color = ink
	line.Width = vg.Points(1.5)
	dots.Color = ink
	dots.Shape = draw.CircleGlyph{}
	dots.Radius = vg.Points(1.6)
	final, err := plotter.NewLine(plotter.XYs{{X: 0, Y: c.Error[last]}, {X: float64(c.Trees[last]), Y: c.Error[last]}})
	if err != nil {
		return nil, fmt.Errorf("chart: %v", err)
	}
	final.Color = red
	final.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
	final.Width = vg.Points(1)
	p.Add(plotter.NewGrid(), final, line, dots)
	p.Legend.Add(fmt.Sprintf("after %d trees: %s", c.Trees[last], format(c.Error[last])), final)
	p.Legend.Top = true
	p.X.Min, p.X.Max = 0, float64(c.Trees[last])
	p.Y.Min = 0
	p.Y.Max = niceTop(top)
	p.Y.Tick.Marker = sameDecimals{plot.DefaultTicks{}}
	return render(p, width, height)
}

// SVG draws horizontal bars, the most important feature on top.
func (im *Importance) SVG() ([]byte, error) {
	n := len(im.Features)
	if n == 0 || n != len(im.Increase) {
		return nil, fmt.Errorf("chart: importance has %d features and %d values", n, len(im.Increase))
	}
	order := barOrder(im.Increase)
	vals := make(plotter.Values, n)
	names := make([]string, n)
	lo, hi := 0.0, 0.0
	for i, j := range order {
		vals[i] = im.Increase[j]
		names[i] = im.Features[j]
		lo, hi = min(lo, vals[i]), max(hi, vals[i])
	}
	unit := "increase in out-of-bag error rate, feature permuted"
	if im.Regression {
		unit = "increase in out-of-bag mean squared error, feature permuted"
	}
	p := newPlot("Permutation importance of each feature", unit, "")
	bars, err := plotter.NewBarChart(vals, vg.Points(16))
	if err != nil {
		return nil, fmt.Errorf("chart: %v", err)
	}
	bars.Horizontal = true
	bars.Color = pale
	bars.LineStyle.Color = ink
	bars.LineStyle.Width = vg.Points(0.8)
	grid := plotter.NewGrid()
	grid.Horizontal.Color = color.Transparent
	grid.Vertical.Color = grey
	labels, err := plotter.NewLabels(barLabels(vals, hi-lo))
	if err != nil {
		return nil, fmt.Errorf("chart: %v", err)
	}
	for i := range labels.TextStyle {
		labels.TextStyle[i].Font = sans
		labels.TextStyle[i].Font.Size = textSize(9)
		labels.TextStyle[i].YAlign = draw.YCenter
		labels.TextStyle[i].Handler = p.X.Label.TextStyle.Handler
	}
	p.Add(grid, bars, labels)
	p.NominalY(names...)
	p.Y.Min, p.Y.Max = -0.6, float64(n)-0.4
	p.Y.Tick.Label.Font.Size = textSize(10)
	p.X.Min = math.Min(0, lo*1.25)
	p.X.Max = niceTop(hi * 1.15) // room for the value labels
	h := max(2.2*vg.Inch, vg.Inch+vg.Points(26)*vg.Length(n))
	return render(p, width, h)
}

// sameDecimals labels every major tick with as many decimals as the most
// precise one needs, so an axis reads 0.00, 0.05, 0.10 rather than 0,
// 0.05, 0.1.
type sameDecimals struct{ plot.Ticker }

func (s sameDecimals) Ticks(lo, hi float64) []plot.Tick {
	ticks := s.Ticker.Ticks(lo, hi)
	digits := 0
	for _, t := range ticks {
		if t.Label == "" {
			continue
		}
		if i := strings.IndexByte(t.Label, '.'); i >= 0 && !strings.ContainsAny(t.Label, "eE") {
			digits = max(digits, len(t.Label)-i-1)
		}
	}
	for i := range ticks {
		if ticks[i].Label != "" && !strings.ContainsAny(ticks[i].Label, "eE") {
			ticks[i].Label = strconv.FormatFloat(ticks[i].Value, 'f', digits, 64)
		}
	}
	return ticks
}

// barOrder is the order of the bars from the bottom up: ascending
// importance, so the most important feature is on top; equal values keep
// model order from the top down.
func barOrder(inc []float64) []int {
	order := make([]int, len(inc))
	for i := range order {
		order[i] = i
	}
	slices.SortStableFunc(order, func(a, b int) int {
		switch x, y := inc[a], inc[b]; {
		case x < y:
			return -1
		case x > y:
			return 1
		}
		return b - a
	})
	return order
}

// barLabels puts each bar's value just past its end.
func barLabels(vals plotter.Values, span float64) plotter.XYLabels {
	var l plotter.XYLabels
	for i, v := range vals {
		x := v + 0.015*span
		if v < 0 {
			x = 0.015 * span
		}
		l.XYs = append(l.XYs, plotter.XY{X: x, Y: float64(i)})
		l.Labels = append(l.Labels, strconv.FormatFloat(v, 'g', 3, 64))
	}
	return l
}

// margin is the blank border around every chart, so that no label touches
// the edge of the picture.
const margin = 14 * vg.Millimeter / 4 // 3.5 mm, about 10 points

// render draws p into an SVG of w by h with a margin all round. The text
// names Liberation Sans, which the layout was measured with, then fonts
// of the same widths, then the generic sans-serif, so that it shows on a
// machine with none of them installed (fontFamilies). Embedding the font
// instead (gonum's vgsvg.EmbedFonts) would make each chart half a
// megabyte.
func render(p *plot.Plot, w, h vg.Length) ([]byte, error) {
	c := vgsvg.NewWith(vgsvg.UseWH(w, h))
	p.Draw(draw.Crop(draw.New(c), margin, -margin, margin, -margin))
	var b bytes.Buffer
	if _, err := c.WriteTo(&b); err != nil {
		return nil, fmt.Errorf("chart: %v", err)
	}
	return marked(shrinkText(fontFamilies(b.Bytes()))), nil
}

// fontSlack is how much wider than the Liberation Sans the layout is
// measured with the text may be drawn and still fit its place: DejaVu
// Sans, the sans-serif of many Linux machines without Liberation, runs
// 1.10 to 1.15 times as wide over the charts' labels (measured with
// gonum's font cache and Debian's fonts-dejavu-core 2.37). Text is laid
// out at fontSlack times its size and drawn at its size (shrinkText), so
// that in any of the fonts render names, or in DejaVu Sans, no label
// overruns its neighbour or the picture's edge.
const fontSlack = 1.16

// textSize is the size to lay text of pt points out at.
func textSize(pt float64) vg.Length { return vg.Points(pt) * fontSlack }

var fontSize = regexp.MustCompile(`font-size:([0-9.]+)px`)

// shrinkText draws every text at its size, fontSlack below the size its
// place was measured at.
func shrinkText(svg []byte) []byte {
	return fontSize.ReplaceAllFunc(svg, func(m []byte) []byte {
		v, err := strconv.ParseFloat(string(fontSize.FindSubmatch(m)[1]), 64)
		if err != nil {
			return m
		}
		return []byte("font-size:" + strconv.FormatFloat(v/fontSlack, 'f', 2, 64) + "px")
	})
}

// fontFamilies lists, after Liberation Sans, the fonts with its widths
// (Arimo, Arial, Helvetica) and the generic family every SVG viewer has.
func fontFamilies(svg []byte) []byte {
	return bytes.ReplaceAll(svg, []byte("font-family:Liberation Sans;"),
		[]byte("font-family:'Liberation Sans',Arimo,Arial,Helvetica,sans-serif;"))
}

// marked names sawmill as the chart's generator in the comment after the
// XML declaration, so that sawmill train --plots knows a chart it drew
// from a file of the user's, which it does not overwrite.
func marked(svg []byte) []byte {
	const mark = "<!-- Generated by sawmill (drawn with gonum.org/v1/plot); sawmill train redraws it when asked to. -->"
	if i := bytes.Index(svg, []byte("<!--")); i >= 0 && bytes.Count(svg[:i], []byte("\n")) < 2 {
		if j := bytes.Index(svg[i:], []byte("-->")); j >= 0 {
			return append(append(append([]byte(nil), svg[:i]...), mark...), svg[i+j+3:]...)
		}
	}
	return svg
}

// niceTop is a round axis maximum a little above v (1 for v <= 0).
func niceTop(v float64) float64 {
	if !(v > 0) || math.IsInf(v, 0) {
		return 1
	}
	v *= 1.1
	step := math.Pow(10, math.Floor(math.Log10(v)))
	for _, m := range []float64{1, 1.5, 2, 2.5, 3, 4, 5, 6, 8, 10} {
		if m*step >= v {
			return m * step
		}
	}
	return 10 * step
}

func format(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }
