// Package goldencase loads sawmill's golden cases (golden/testdata) for the
// tests that run them through every target's verify.Runner.
//
// A case is a folder under testdata holding model.json and rows.csv, found by
// walking for model.json, so a new case is a new folder. Optional files:
//
//	case.json    flags: {"snapshot": true} keeps the generated source under
//	             want/<runner>/<layout>[-<variant>]/ and compares it;
//	             {"runners": ["go"]} limits the runners; {"skip_layouts": [...]}
//	sklearn.csv  reference outputs from scikit-learn, one row per rows.csv row:
//	             id, one column per class, sklearn_class; checked within 1e-12
//	stderr.txt   the case must fail to load, with this message
package goldencase

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"testing"

	"github.com/sawmill-dev/sawmill/forest"
)

// Case is one golden case.
type Case struct {
	Name    string
	Dir     string
	Flags   Flags
	Model   *forest.Forest
	Rows    *forest.Rows
	Sklearn [][]float64 // per row, per class; nil when the case has none
	// WantErr is the expected load error (stderr.txt), "" for a normal case.
	WantErr string
	LoadErr error
}

// Flags are a case's options from case.json.
type Flags struct {
	Snapshot    bool     `json:"snapshot"`
	Runners     []string `json:"runners"`
	SkipLayouts []string `json:"skip_layouts"`
	// Slow marks a big case that only runs outside -short.
	Slow bool `json:"slow"`
}

// Cases finds every case under root, in path order.
func Cases(root string) ([]*Case, error) {
	var cases []*Case
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && d.Name() == "want" {
			return filepath.SkipDir
		}
		if d.IsDir() || d.Name() != "model.json" {
			return nil
		}
		dir := filepath.Dir(path)
		name, _ := filepath.Rel(root, dir)
		c, err := LoadCase(dir, filepath.ToSlash(name))
		if err != nil {
			return err
		}
		cases = append(cases, c)
		return nil
	})
	return cases, err
}

// LoadCase reads one case folder. A model that fails to load is returned
// with LoadErr set, so that cases holding stderr.txt can check the message.
func LoadCase(dir, name string) (*Case, error) {
	c := &Case{Name: name, Dir: dir}
	if b, err := os.ReadFile(filepath.Join(dir, "case.json")); err == nil {
		if err := json.Unmarshal(b, &c.Flags); err != nil {
			return nil, fmt.Errorf("%s: %v", filepath.Join(dir, "case.json"), err)
		}
	}
	if b, err := os.ReadFile(filepath.Join(dir, "stderr.txt")); err == nil {
		c.WantErr = string(b)
	}
	c.Model, c.LoadErr = forest.ReadFile(filepath.Join(dir, "model.json"))
	if c.LoadErr != nil {
		if c.WantErr == "" {
			return nil, c.LoadErr
		}
		return c, nil
	}
	rows, err := forest.ReadRowsFile(filepath.Join(dir, "rows.csv"), c.Model.Features, forest.RowOptions{})
	if err != nil {
		return nil, err
	}
	c.Rows = rows
	sk := filepath.Join(dir, "sklearn.csv")
	if _, err := os.Stat(sk); err == nil {
		c.Sklearn, err = readSklearn(sk, c.Model, rows.Len())
		if err != nil {
			return nil, err
		}
	}
	return c, nil
}

// readSklearn reads recorded reference probabilities: a header of id, the
// class labels in model order, sklearn_class.
func readSklearn(path string, f *forest.Forest, n int) ([][]float64, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	recs, err := csv.NewReader(fh).ReadAll()
	if err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	if len(recs) != n+1 {
		return nil, fmt.Errorf("%s: %d rows, rows.csv has %d", path, len(recs)-1, n)
	}
	if want := append(append([]string{"id"}, f.Classes...), "sklearn_class"); !slices.Equal(recs[0], want) {
		return nil, fmt.Errorf("%s: header %v, want %v", path, recs[0], want)
	}
	out := make([][]float64, n)
	for i, r := range recs[1:] {
		out[i] = make([]float64, len(f.Classes))
		for j := range f.Classes {
			v, err := strconv.ParseFloat(r[1+j], 64)
			if err != nil {
				return nil, fmt.Errorf("%s:%d: %v", path, i+2, err)
			}
			out[i][j] = v
		}
	}
	return out, nil
}

// Reference scores every row of c with the interpreter.
func (c *Case) Reference() (outputs []float64, classes []int) {
	return c.reference(c.Rows)
}

// Float32Inputs is implemented by runners (verify.Runner) with a variant
// that takes float32 inputs, whose reference is the interpreter on the rows
// rounded to float32, since that is all the emitted code receives.
type Float32Inputs interface {
	Float32Inputs(variant string) bool
}

// ReferenceFor is Reference for runner r's variant: on the rows rounded to
// float32 when the variant takes float32 inputs.
func (c *Case) ReferenceFor(r any, variant string) (outputs []float64, classes []int) {
	if fi, ok := r.(Float32Inputs); !ok || !fi.Float32Inputs(variant) {
		return c.Reference()
	}
	rows := *c.Rows
	rows.Values = make([]float64, len(c.Rows.Values))
	for i, v := range c.Rows.Values {
		rows.Values[i] = float64(float32(v))
	}
	return c.reference(&rows)
}

func (c *Case) reference(rows *forest.Rows) (outputs []float64, classes []int) {
	k := c.Model.NumOutputs()
	outputs = make([]float64, rows.Len()*k)
	for i := 0; i < rows.Len(); i++ {
		o := outputs[i*k : (i+1)*k]
		c.Model.Predict(rows.Row(i), o)
		if c.Model.IsClassifier() {
			classes = append(classes, c.Model.ClassOf(o))
		}
	}
	return outputs, classes
}

// CheckSklearn fails t unless got, NumOutputs per row back to back, is
// within 1e-12 of the scikit-learn outputs the case recorded (sklearn.csv).
func (c *Case) CheckSklearn(t testing.TB, got []float64, who string) {
	t.Helper()
	k := c.Model.NumOutputs()
	worst := 0.0
	for i, ref := range c.Sklearn {
		probs := got[i*k : (i+1)*k]
		if k == 1 { // logistic: p(class 1)
			probs = []float64{1 - got[i], got[i]}
		}
		for j, v := range ref {
			d := math.Abs(probs[j] - v)
			worst = max(worst, d)
			if !(d <= 1e-12) {
				t.Fatalf("%s, row %d, class %q: %v, scikit-learn recorded %v", who, i, c.Model.Classes[j], probs[j], v)
			}
		}
	}
	t.Logf("%s vs scikit-learn: %d rows, max |diff| %g", who, len(c.Sklearn), worst)
}
