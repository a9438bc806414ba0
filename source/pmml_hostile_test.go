package source

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/stretchr/testify/require"
)

func pmmlFixture(t testing.TB, dir string) []byte {
	data, err := os.ReadFile(filepath.Join("testdata", "pmml", dir, "model.pmml"))
	require.NoError(t, err)
	return data
}

// pmmlDoc wraps a TreeModel body (MiningSchema and Node) over double fields
// a and b in a PMML document.
func pmmlDoc(model string) []byte {
	return []byte(`<?xml version="1.0"?>
<PMML xmlns="http://www.dmg.org/PMML-4_4" version="4.4">
<DataDictionary>
<DataField name="a" optype="continuous" dataType="double"/>
<DataField name="b" optype="continuous" dataType="double"/>
<DataField name="s" optype="categorical" dataType="string"/>
<DataField name="y" optype="continuous" dataType="double"/>
</DataDictionary>
` + model + `
</PMML>`)
}

const pmmlSchemaAB = `<MiningSchema><MiningField name="y" usageType="target"/><MiningField name="a"/><MiningField name="b"/></MiningSchema>`

// TestPMMLHostile: entity expansion, external entities, deep nesting and
// truncation get a clear error that names the file, quickly, and with
// memory in proportion to the file.
func TestPMMLHostile(t *testing.T) {
	laughs := `<?xml version="1.0"?>
<!DOCTYPE PMML [
 <!ENTITY lol "lol">
 <!ENTITY lol1 "&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;&lol;">
 <!ENTITY lol2 "&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;&lol1;">
 <!ENTITY lol3 "&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;&lol2;">
 <!ENTITY lol9 "&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;&lol3;">
]>
<PMML version="4.4"><Header description="&lol9;"/></PMML>`
	external := `<?xml version="1.0"?>
<!DOCTYPE PMML [<!ENTITY xxe SYSTEM "file:///etc/passwd">]>
<PMML version="4.4"><Header description="&xxe;"/></PMML>`
	deep := pmmlDoc(`<TreeModel functionName="regression">` + pmmlSchemaAB + `<Node score="1"><True/>` +
		strings.Repeat(`<Node score="1"><True/>`, 100000))
	truncated := pmmlFixture(t, "sk-rf-cancer")
	truncated = truncated[:len(truncated)/2]
	cases := []struct {
		name, data, want string
	}{
		{"billion laughs", laughs, "m.pmml:2: the document has a type declaration (<!DOCTYPE ...>); PMML needs none, and sawmill reads no DTD and expands no entity\nhint: remove the declaration"},
		{"external entity", external, "m.pmml:2: the document has a type declaration (<!DOCTYPE ...>)"},
		{"undeclared entity", `<PMML version="4.4"><Header description="&lol;"/></PMML>`, "m.pmml:1: not well-formed XML: attribute description of <Header>: invalid character entity &lol; (sawmill knows only XML's predefined entities)"},
		{"deep nesting", string(deep), "m.pmml:9: elements nested more than 2000 deep"},
		{"truncated", string(truncated), "m.pmml:"},
		{"not pmml root", `<?xml version="1.0"?><PMMLx/>`, "m.pmml:1: the root element is <PMMLx>, not <PMML>"},
		{"mismatched tags", `<PMML version="4.4"><Header></DataDictionary></PMML>`, "m.pmml:1: end tag </DataDictionary> closes <Header>"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			start := time.Now()
			var err error
			alloc := allocatedBytes(func() { _, err = Decode([]byte(c.data), "m.pmml", "pmml", Options{}) })
			require.Error(t, err)
			require.Contains(t, err.Error(), c.want)
			require.Less(t, time.Since(start), 2*time.Second)
			require.Less(t, alloc, 400*uint64(len(c.data))+1<<20, "allocated %d bytes for %d", alloc, len(c.data))
		})
	}
	// The truncated file's error says where it ends.
	_, err := Decode(truncated, "m.pmml", "", Options{})
	require.Error(t, err)
	require.Regexp(t, `^m\.pmml:\d+: `, err.Error())
}

// TestPMMLRefuses: constructs sawmill does not read get an error that names
// the file, line and element, with a hint where there is a fix.
func TestPMMLRefuses(t *testing.T) {
	tree := func(attrs, nodes string) []byte {
		return pmmlDoc(`<TreeModel functionName="regression" ` + attrs + `>` + pmmlSchemaAB + `<Node score="0"><True/>` + nodes + `</Node></TreeModel>`)
	}
	vote := pmmlFixture(t, "hand-vote-replacement")
	// Blow-up: a chain of 40 nested (a or b) and (a or b) ... predicates
	// doubles the layout at every level.
	var pred string = `<SimplePredicate field="a" operator="lessOrEqual" value="1"/>`
	for i := range 40 {
		pred = fmt.Sprintf(`<CompoundPredicate booleanOperator="or">%s<SimplePredicate field="b" operator="greaterThan" value="%d"/></CompoundPredicate>`, pred, i)
		pred = fmt.Sprintf(`<CompoundPredicate booleanOperator="and">%s<SimplePredicate field="a" operator="lessThan" value="%d"/></CompoundPredicate>`, pred, i)
	}
	cases := []struct {
		name string
		data []byte
		want string
	}{
		{"weighted confidence", tree(`missingValueStrategy="weightedConfidence"`, `<Node score="1"><True/></Node>`),
			"m.pmml:9: TreeModel: missingValueStrategy \"weightedConfidence\" is not supported"},
		{"aggregate nodes", tree(`missingValueStrategy="aggregateNodes"`, `<Node score="1"><True/></Node>`),
			"missingValueStrategy \"aggregateNodes\" is not supported"},
		{"string field", tree(``, `<Node score="1"><SimplePredicate field="s" operator="equal" value="x"/></Node>`),
			"field \"s\" is not an active field"},
		{"string active field", pmmlDoc(`<TreeModel functionName="regression"><MiningSchema><MiningField name="s"/></MiningSchema><Node score="0"><True/></Node></TreeModel>`),
			"m.pmml:9: MiningField: field \"s\" holds strings; sawmill scores numeric inputs\nhint: encode the categories as numeric codes"},
		{"string set", tree(``, `<Node score="1"><SimpleSetPredicate field="a" booleanOperator="isIn"><Array type="string">"x" "y"</Array></SimpleSetPredicate></Node>`),
			"Array: an Array of type \"string\"; sawmill reads sets of numeric codes"},
		{"fractional set member", tree(``, `<Node score="1"><SimpleSetPredicate field="a" booleanOperator="isIn"><Array type="real">1 2.5</Array></SimpleSetPredicate></Node>`),
			"\"2.5\" is not a category sawmill can test here"},
		{"unknown operator", tree(``, `<Node score="1"><SimplePredicate field="a" operator="like" value="1"/></Node>`),
			"m.pmml:9: SimplePredicate: operator \"like\" is not one PMML 4.4 defines"},
		{"nan value", tree(``, `<Node score="1"><SimplePredicate field="a" operator="lessThan" value="NaN"/></Node>`),
			"m.pmml:9: SimplePredicate: \"NaN\" is not a finite number for double field \"a\""},
		{"nan score", tree(``, `<Node score="nan"><True/></Node>`), "m.pmml:9: Node: score \"nan\" is not a finite number"},
		{"leaf without score", tree(``, `<Node><True/></Node>`), "a leaf Node without a score"},
		{"default child missing", tree(`missingValueStrategy="defaultChild"`, `<Node id="7" score="1"><True/><Node score="2"><True/></Node></Node>`),
			"m.pmml:9: Node: missingValueStrategy defaultChild, but the Node has no defaultChild"},
		{"blow-up", tree(``, `<Node score="1">`+pred+`</Node>`), "the tree grows past 1152 binary nodes"},
		{"skipped segment", bytes.Replace(vote, []byte(` missingPredictionTreatment="returnMissing"`), nil, 1), "the Segmentation's missingPredictionTreatment \"continue\" then leaves it out of the majorityVote"},
		{"not a predicate", tree(``, `<Node score="1"><CompoundPredicate booleanOperator="or"><Predicate/><True/></CompoundPredicate></Node>`),
			"m.pmml:9: Predicate: not a predicate (PMML 4.4 has SimplePredicate, CompoundPredicate, SimpleSetPredicate, True and False)"},
		{"penalty", tree(`missingValuePenalty="0.5"`, `<Node score="1"><True/></Node>`), "missingValuePenalty 0.5 is not supported"},
		{"selectFirst", pmmlDoc(`<MiningModel functionName="regression">` + pmmlSchemaAB + `<Segmentation multipleModelMethod="selectFirst"><Segment><True/><TreeModel functionName="regression">` + pmmlSchemaAB + `<Node score="1"><True/></Node></TreeModel></Segment></Segmentation></MiningModel>`),
			"multipleModelMethod \"selectFirst\" for a regression model is not supported\nhint:"},
		{"weights", pmmlDoc(`<MiningModel functionName="regression">` + pmmlSchemaAB + `<Segmentation multipleModelMethod="weightedAverage"><Segment weight="2"><True/><TreeModel functionName="regression">` + pmmlSchemaAB + `<Node score="1"><True/></Node></TreeModel></Segment></Segmentation></MiningModel>`),
			"weight 2: sawmill reads weighted segmentations whose weights are all 1"},
		{"derived expression", pmmlDoc(`<TreeModel functionName="regression">` + pmmlSchemaAB + `<LocalTransformations><DerivedField name="d" dataType="double"><Apply function="+"><FieldRef field="a"/><Constant>1</Constant></Apply></DerivedField></LocalTransformations><Node score="1"><True/></Node></TreeModel>`),
			"derived field \"d\" is computed by Apply; sawmill reads derived fields that only refer to another field"},
		{"regression model", pmmlDoc(`<RegressionModel functionName="regression"/>`), "sawmill reads TreeModel and MiningModel, not RegressionModel"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Decode(c.data, "m.pmml", "", Options{})
			require.Error(t, err)
			require.Contains(t, err.Error(), c.want)
		})
	}
	require.Contains(t, string(vote), `multipleModelMethod="majorityVote" missingPredictionTreatment="returnMissing"`, "the fixture the skipped-segment case edits")
}

// TestPMMLDetect: Detect takes PMML documents and no other format's files.
func TestPMMLDetect(t *testing.T) {
	require.True(t, detectPMML(pmmlFixture(t, "sk-dt-wine")))
	require.True(t, detectPMML([]byte("\ufeff<!-- c --><PMML version=\"4.4\"/>")))
	require.False(t, detectPMML([]byte(`{"sawmill_forest": 1}`)))
	require.False(t, detectPMML([]byte("<PMMLx/>")))
	require.False(t, detectPMML([]byte("tree\nversion=v4\n")))
	f, err := Detect(pmmlFixture(t, "sk-gb-wine"), "m.pmml")
	require.NoError(t, err)
	require.Equal(t, "pmml", f.Name)
}

// TestPMMLFloatThreshold walks the doubles around the threshold that stands
// for round32(x) <= w in a double model: the threshold itself rounds to at
// most w, the next double up rounds above it (so x <= upper64(w) is exactly
// round32(x) <= w).
func TestPMMLFloatThreshold(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	ws := []float32{0, float32(math.Copysign(0, -1)), 1, -1, math.MaxFloat32, -math.MaxFloat32, math.SmallestNonzeroFloat32, 13.05, 19.449999}
	for range 20000 {
		w := math.Float32frombits(rng.Uint32())
		if !math.IsInf(float64(w), 0) && w == w {
			ws = append(ws, w)
		}
	}
	for _, w := range ws {
		u := upper64(w)
		require.LessOrEqual(t, float32(u), w, "w=%v", w)
		require.Greater(t, float32(math.Nextafter(u, math.Inf(1))), w, "w=%v", w)
	}
	// A document with a float field in a model that also reads a double
	// field goes through upper64: the fixture hand-mixed-precision holds it
	// to the evaluator; here the split's threshold is checked directly.
	doc := bytes.Replace(pmmlDoc(`<TreeModel functionName="regression">`+pmmlSchemaAB+`<Node score="0"><True/><Node score="1"><SimplePredicate field="a" operator="lessOrEqual" value="0.1"/></Node></Node></TreeModel>`),
		[]byte(`name="a" optype="continuous" dataType="double"`), []byte(`name="a" optype="continuous" dataType="float"`), 1)
	r, err := Decode(doc, "m.pmml", "", Options{})
	require.NoError(t, err)
	require.Equal(t, upper64(0.1), r.Forest.Trees[0].Threshold[0])
	require.Equal(t, "float64", string(r.Forest.InputPrecision))
}

// TestPMMLAccepts: documents the reader takes, checked against what the
// specification says they compute (PMML 4.4, Multiple Models: a segment
// whose tree always predicts needs no missingPredictionTreatment; Tree
// Models: the first true child wins; Targets on a sum).
func TestPMMLAccepts(t *testing.T) {
	seg := func(score string) string {
		return `<Segment><True/><TreeModel functionName="regression" missingValueStrategy="none">` + pmmlSchemaAB +
			`<Node score="0"><True/><Node score="` + score + `"><SimplePredicate field="a" operator="lessThan" value="2"/></Node>` +
			`<Node score="7"><SimplePredicate field="a" operator="lessThan" value="3"/></Node><Node score="100"><True/></Node></Node></TreeModel></Segment>`
	}
	doc := pmmlDoc(`<MiningModel functionName="regression">` + pmmlSchemaAB + `<Targets><Target rescaleFactor="2"/></Targets>` +
		`<Segmentation multipleModelMethod="sum">` + seg("1") + seg("10") + `</Segmentation></MiningModel>`)
	r, err := Decode(doc, "m.pmml", "", Options{})
	require.NoError(t, err)
	require.Empty(t, r.Notes, "every row gets a prediction and the rescaling is exact")
	for _, c := range []struct{ a, want float64 }{
		{1, 22}, {math.Nextafter(2, 0), 22}, {2, 28}, {2.5, 28}, {3, 400}, {math.NaN(), 400}, // a missing value: both tests false
	} {
		out := []float64{0}
		r.Forest.Predict([]float64{c.a, 0}, out)
		require.Equal(t, c.want, out[0], "a=%v", c.a)
	}
}
