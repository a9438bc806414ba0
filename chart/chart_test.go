package chart

import (
	"bytes"
	"encoding/xml"
	"errors"
	"html"
	"io"
	"math"
	"math/rand/v2"
	"regexp"
	"strconv"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
)

// pumps invents a small pump-health table; it stands for no real
// measurement.
func pumps(n int) *train.Data {
	rng := rand.New(rand.NewPCG(3, 5))
	d := &train.Data{
		Features: []string{"vibration_rms", "bearing_temp_c", "motor_current_a"},
		Task:     forest.Classification,
		Classes:  []string{"bearing_wear", "healthy"},
		Label:    "state",
	}
	for range n {
		vib, temp, cur := 1+3*rng.Float64(), 40+40*rng.Float64(), 10+5*rng.Float64()
		c := 1
		if temp > 65 && vib > 2 || rng.Float64() < 0.05 {
			c = 0
		}
		d.X = append(d.X, vib, temp, cur)
		d.Y = append(d.Y, float64(c))
	}
	return d
}

func trained(t *testing.T, importance bool) *forest.Forest {
	t.Helper()
	res, err := train.Train(pumps(200), train.Settings{Trees: 30, Seed: 1, SkipImportance: !importance})
	require.NoError(t, err)
	return res.Forest
}

// wellFormed fails unless b is one well-formed XML document with an svg
// root, and returns its character data.
func wellFormed(t *testing.T, b []byte) string {
	t.Helper()
	dec := xml.NewDecoder(bytes.NewReader(b))
	var text bytes.Buffer
	root := ""
	for {
		tok, err := dec.Token()
		if err == io.EOF {
			break
		}
		require.NoError(t, err)
		switch tok := tok.(type) {
		case xml.StartElement:
			if root == "" {
				root = tok.Name.Local
			}
		case xml.CharData:
			text.Write(tok)
			text.WriteByte('\n')
		}
	}
	require.Equal(t, "svg", root)
	return text.String()
}

func TestFromForest(t *testing.T) {
	f := trained(t, true)
	curve, imp, err := FromForest(f)
	require.NoError(t, err)
	require.Equal(t, 30, curve.Trees[len(curve.Trees)-1])
	require.Len(t, curve.Error, len(curve.Trees))
	require.False(t, curve.Regression)
	require.Equal(t, f.Features, imp.Features, "importance in model order")
	for _, v := range curve.Error {
		require.True(t, v >= 0 && v <= 1, "an error rate: %v", v)
	}

	_, imp, err = FromForest(trained(t, false))
	require.NoError(t, err)
	require.Nil(t, imp, "importance skipped")

	sk, err := forest.ReadFile("../golden/testdata/sklearn-wine/model.json")
	require.NoError(t, err)
	_, _, err = FromForest(sk)
	require.True(t, errors.Is(err, ErrNoProvenance), "a scikit-learn model has no out-of-bag curve: %v", err)
}

func TestSVG(t *testing.T) {
	curve, imp, err := FromForest(trained(t, true))
	require.NoError(t, err)
	a, err := curve.SVG()
	require.NoError(t, err)
	text := wellFormed(t, a)
	require.Contains(t, text, "Out-of-bag error by number of trees")
	require.Contains(t, text, "number of trees")
	require.Contains(t, text, "after 30 trees")
	b, err := curve.SVG()
	require.NoError(t, err)
	require.Equal(t, a, b, "the same curve draws the same bytes")

	a, err = imp.SVG()
	require.NoError(t, err)
	text = wellFormed(t, a)
	for _, name := range imp.Features {
		require.Contains(t, text, name)
	}
	require.Contains(t, text, "Permutation importance")
	require.Contains(t, string(a), "'Liberation Sans',Arimo,Arial")

	reg := &Curve{Trees: []int{1, 2, 3}, Error: []float64{4, 3, 2.5}, Regression: true}
	a, err = reg.SVG()
	require.NoError(t, err)
	require.Contains(t, wellFormed(t, a), "mean squared error")

	_, err = (&Curve{Trees: []int{1}, Error: nil}).SVG()
	require.Error(t, err)
	_, err = (&Importance{}).SVG()
	require.Error(t, err)
}

func TestBarOrder(t *testing.T) {
	// bottom to top: ascending, the largest on top; equal values keep model
	// order reading from the top.
	require.Equal(t, []int{3, 2, 0, 1}, barOrder([]float64{0.2, 0.5, 0.1, -0.01}))
	require.Equal(t, []int{2, 1, 0}, barOrder([]float64{0.3, 0.3, 0.3}))
}

func TestNiceTop(t *testing.T) {
	for _, c := range []struct{ in, want float64 }{
		{0.253, 0.3}, {0.08, 0.1}, {0.5, 0.6}, {7, 8}, {0, 1}, {-1, 1}, {math.NaN(), 1}, {85, 100}, {91, 150},
	} {
		got := niceTop(c.in)
		require.InDelta(t, c.want, got, 1e-12, "niceTop(%v)", c.in)
		if c.in > 0 {
			require.Greater(t, got, c.in)
		}
	}
}

func TestSameDecimals(t *testing.T) {
	var labels []string
	for _, tk := range (sameDecimals{plot.DefaultTicks{}}).Ticks(0, 0.15) {
		if tk.Label != "" {
			labels = append(labels, tk.Label)
		}
	}
	require.NotEmpty(t, labels)
	for _, l := range labels {
		require.Len(t, l, len(labels[0]), "labels %v", labels)
	}
}

// Labels fit the picture, inside a margin, even drawn in a font fontSlack
// wider than Liberation Sans (DejaVu Sans, where Liberation is not
// installed): each horizontal text, measured at the size it was laid out
// at, lies within the margins; it is drawn at its own size, in a list of
// fonts that ends with the generic sans-serif.
func TestSVGFitsAnyFont(t *testing.T) {
	curve, imp, err := FromForest(trained(t, true))
	require.NoError(t, err)
	text := regexp.MustCompile(`<text x="([-0-9.]+)" y="[-0-9.]+" transform="scale\(1, -1\)"\s+style="([^"]*)">([^<]*)</text>`)
	for _, draw := range []func() ([]byte, error){curve.SVG, imp.SVG} {
		b, err := draw()
		require.NoError(t, err)
		svg := string(b)
		require.Contains(t, svg, "<!-- Generated by sawmill", "the mark sawmill train --plots looks for")
		width := regexp.MustCompile(`<svg width="([0-9.]+)pt"`).FindStringSubmatch(svg)
		require.NotNil(t, width)
		w, _ := strconv.ParseFloat(width[1], 64)
		found := 0
		for _, m := range text.FindAllStringSubmatch(svg, -1) {
			found++
			x, _ := strconv.ParseFloat(m[1], 64)
			require.Contains(t, m[2], "font-family:'Liberation Sans',Arimo,Arial,Helvetica,sans-serif;")
			size := regexp.MustCompile(`font-size:([0-9.]+)px`).FindStringSubmatch(m[2])
			require.NotNil(t, size)
			pt, _ := strconv.ParseFloat(size[1], 64)
			require.LessOrEqual(t, pt, 13.0, "drawn at its own size")
			laidOut := textSize(pt)
			face := font.DefaultCache.Lookup(font.Font{Typeface: sans.Typeface, Variant: sans.Variant, Size: laidOut}, laidOut)
			end := x + float64(face.Width(html.UnescapeString(m[3])))
			assert.GreaterOrEqual(t, x, float64(margin)-0.01, "%q starts inside the margin", m[3])
			assert.LessOrEqual(t, end, w-float64(margin)+0.01, "%q ends inside the margin", m[3])
		}
		require.Greater(t, found, 5, "the horizontal labels were found")
	}
}
