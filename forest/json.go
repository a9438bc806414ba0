package forest

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
)

// DefaultMaxFileBytes caps the size of a model file a reader accepts unless
// told otherwise (ReadOptions.MaxBytes).
const DefaultMaxFileBytes = 2 << 30

// DefaultMaxNodes caps the node slots over all trees unless told otherwise
// (ReadOptions.MaxNodes): about as many as a file of DefaultMaxFileBytes
// can hold.
const DefaultMaxNodes = 100_000_000

// ReadOptions bounds what a reader accepts. Zero values mean the defaults.
type ReadOptions struct {
	MaxBytes int64 // largest file accepted; default DefaultMaxFileBytes
	MaxNodes int64 // most node slots over all trees; default DefaultMaxNodes
}

// valueBudget is how many value entries a file of n bytes may make a reader
// hold. A value written in the file takes at least two bytes ("0,"), so a
// file that gives every node its vector stays well within it; a file of many
// short or empty vectors for a model of many outputs (each node slot holds a
// full vector in memory) does not.
func valueBudget(n int) int64 { return 4*int64(n) + 1<<20 }

// ReadFile reads and validates a model file. Errors name the file first.
func ReadFile(path string) (*Forest, error) {
	return ReadFileOptions(path, ReadOptions{})
}

// ReadFileOptions is ReadFile with limits.
func ReadFileOptions(path string, o ReadOptions) (*Forest, error) {
	fh, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer fh.Close()
	return ReadOptionsFrom(fh, path, o)
}

// Read reads and validates a model from r; name is used in messages.
func Read(r io.Reader, name string) (*Forest, error) {
	return ReadOptionsFrom(r, name, ReadOptions{})
}

// ReadOptionsFrom is Read with limits.
func ReadOptionsFrom(r io.Reader, name string, o ReadOptions) (*Forest, error) {
	max := o.MaxBytes
	if max <= 0 {
		max = DefaultMaxFileBytes
	}
	data, err := io.ReadAll(io.LimitReader(r, max+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	if int64(len(data)) > max {
		return nil, fmt.Errorf("%s: file is larger than the limit of %d bytes\nhint: raise the limit if the model is meant to be this large", name, max)
	}
	return Decode(data, name, o)
}

// fileDoc mirrors the document; RawMessage fields tell a missing key from a
// zero value.
type fileDoc struct {
	Version        json.RawMessage   `json:"sawmill_forest"`
	Task           *string           `json:"task"`
	Features       []string          `json:"features"`
	Classes        []string          `json:"classes"`
	InputPrecision *string           `json:"input_precision"`
	Combine        *string           `json:"combine"`
	Transform      *string           `json:"output_transform"`
	BaseScore      []float64         `json:"base_score"`
	Trees          []json.RawMessage `json:"trees"`
	Provenance     json.RawMessage   `json:"provenance"`
}

type treeDoc struct {
	Feature     []int       `json:"feature"`
	Threshold   []float64   `json:"threshold"`
	Left        []int       `json:"left"`
	Right       []int       `json:"right"`
	MissingLeft []bool      `json:"missing_left"`
	Value       [][]float64 `json:"value"`
}

// Decode parses and validates a model document held in memory.
func Decode(data []byte, name string, o ReadOptions) (*Forest, error) {
	if o.MaxBytes > 0 && int64(len(data)) > o.MaxBytes {
		return nil, fmt.Errorf("%s: file is larger than the limit of %d bytes\nhint: raise the limit if the model is meant to be this large", name, o.MaxBytes)
	}
	maxNodes := o.MaxNodes
	if maxNodes <= 0 {
		maxNodes = DefaultMaxNodes
	}
	var d fileDoc
	if err := json.Unmarshal(data, &d); err != nil {
		return nil, fmt.Errorf("%s: %s", name, describeJSONError(data, err))
	}
	var p Problems
	f := &Forest{}
	switch {
	case d.Version == nil:
		p.Add("%s: missing \"sawmill_forest\": not a sawmill forest file", name)
		return nil, p.Err()
	case string(d.Version) != strconv.Itoa(FormatVersion):
		p.Add("%s: sawmill_forest version %s is not supported (this reader knows version %d)", name, d.Version, FormatVersion)
		return nil, p.Err()
	}
	if d.Task == nil {
		p.Add("%s: missing \"task\"", name)
	} else {
		f.Task = Task(*d.Task)
	}
	f.Features = d.Features
	if d.Features == nil {
		p.Add("%s: missing \"features\"", name)
	}
	f.Classes = d.Classes
	f.InputPrecision = Float64
	if d.InputPrecision != nil {
		f.InputPrecision = Precision(*d.InputPrecision)
	}
	f.Combine = Average
	if d.Combine != nil {
		f.Combine = Combine(*d.Combine)
	}
	f.Transform = NoTransform
	if d.Transform != nil {
		f.Transform = Transform(*d.Transform)
	}
	f.BaseScore = d.BaseScore
	if d.Trees == nil {
		p.Add("%s: missing \"trees\"", name)
	}
	if len(d.Provenance) > 0 && string(d.Provenance) != "null" {
		var c bytes.Buffer
		if err := json.Compact(&c, d.Provenance); err == nil {
			f.Provenance = c.Bytes()
		}
	}
	if p.Len() > 0 {
		return nil, p.Err()
	}
	k := numOutputs(f.Task, len(f.Classes), f.Transform)
	if k < 1 {
		k = 1 // the header check below reports the real problem
	}
	f.Trees = make([]Tree, len(d.Trees))
	var nodes, values int64
	var wrongLen map[int]map[int]int // tree -> node -> length found
	for ti, raw := range d.Trees {
		var td treeDoc
		if err := json.Unmarshal(raw, &td); err != nil {
			p.Add("%s: tree %d: %s", name, ti, describeJSONError(raw, err))
			continue
		}
		d.Trees[ti] = nil // let the raw text go as soon as it is decoded
		nodes += int64(len(td.Left))
		if nodes > maxNodes {
			p.Add("%s: tree %d: the model has more than %d nodes, the limit\nhint: raise the limit if the model is meant to be this large", name, ti, maxNodes)
			return nil, p.Err()
		}
		values += int64(len(td.Left)) * int64(k)
		if values > valueBudget(len(data)) {
			p.Add("%s: tree %d: %d node slots of %d outputs each would take %d MiB, far more than a file of %d bytes holds: most value vectors are missing or short\nhint: give every node a value vector of %d entries, as the format asks",
				name, ti, len(td.Left), k, values*8>>20, len(data), k)
			return nil, p.Err()
		}
		var wl map[int]int
		f.Trees[ti], wl = treeFromDoc(&td, ti, k, name, &p)
		if wl != nil {
			if wrongLen == nil {
				wrongLen = map[int]map[int]int{}
			}
			wrongLen[ti] = wl
		}
		if p.Full() {
			break
		}
	}
	if p.Len() > 0 {
		return nil, p.Err()
	}
	if f.BaseScore == nil {
		f.BaseScore = make([]float64, f.NumOutputs())
	}
	if err := f.validate(name, wrongLen); err != nil {
		return nil, err
	}
	return f, nil
}

// treeFromDoc checks the array lengths and flattens the value vectors. Vectors
// of the wrong length are kept as zeros here; validate reports them at
// reachable leaves, the only place they are read.
func treeFromDoc(td *treeDoc, ti, k int, name string, p *Problems) (Tree, map[int]int) {
	n := len(td.Left)
	if td.MissingLeft == nil {
		td.MissingLeft = make([]bool, n)
	}
	lens := []struct {
		key string
		n   int
		nil bool
	}{
		{"feature", len(td.Feature), td.Feature == nil},
		{"threshold", len(td.Threshold), td.Threshold == nil},
		{"right", len(td.Right), td.Right == nil},
		{"missing_left", len(td.MissingLeft), false},
		{"value", len(td.Value), td.Value == nil},
	}
	if td.Left == nil {
		p.Add("%s: tree %d: missing \"left\"", name, ti)
		return Tree{}, nil
	}
	bad := false
	for _, l := range lens {
		if l.nil {
			p.Add("%s: tree %d: missing %q", name, ti, l.key)
			bad = true
		} else if l.n != n {
			p.Add("%s: tree %d: %q has %d entries but \"left\" has %d", name, ti, l.key, l.n, n)
			bad = true
		}
	}
	if n == 0 && !bad {
		p.Add("%s: tree %d: has no nodes", name, ti)
		bad = true
	}
	if bad {
		return Tree{}, nil
	}
	t := Tree{
		Feature:     td.Feature,
		Threshold:   td.Threshold,
		Left:        td.Left,
		Right:       td.Right,
		MissingLeft: td.MissingLeft,
		Value:       make([]float64, n*k),
	}
	var wrong map[int]int
	for i, v := range td.Value {
		if len(v) == k {
			copy(t.Value[i*k:], v)
		} else if t.Left[i] == -1 {
			if wrong == nil {
				wrong = map[int]int{}
			}
			wrong[i] = len(v)
		}
	}
	td.Value = nil
	return t, wrong
}

func describeJSONError(data []byte, err error) string {
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.As(err, &se):
		line, col := lineCol(data, se.Offset)
		return fmt.Sprintf("line %d, column %d: invalid JSON: %s", line, col, se.Error())
	case errors.As(err, &te):
		line, col := lineCol(data, te.Offset)
		field := te.Field
		if field == "" {
			field = "document"
		}
		return fmt.Sprintf("line %d, column %d: %q: expected %s, found a JSON %s", line, col, field, te.Type, te.Value)
	}
	return err.Error()
}

func lineCol(data []byte, off int64) (int, int) {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	before := data[:off]
	line := bytes.Count(before, []byte{'\n'}) + 1
	col := int(off) - bytes.LastIndexByte(before, '\n')
	return line, col
}

// WriteFile writes f to path atomically: a temporary file in the same folder,
// then a rename, so a reader never sees half a model.
func WriteFile(path string, f *Forest) error {
	var buf bytes.Buffer
	if err := f.Encode(&buf); err != nil {
		return err
	}
	return WriteFileAtomic(path, buf.Bytes(), 0o644)
}

// WriteFileAtomic writes data to path through a temporary file and a rename.
func WriteFileAtomic(path string, data []byte, perm os.FileMode) error {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return err
	}
	name := tmp.Name()
	_, err = tmp.Write(data)
	if err == nil {
		err = tmp.Chmod(perm)
	}
	if cerr := tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(name, path)
	}
	if err != nil {
		os.Remove(name)
		return err
	}
	return nil
}

// Encode writes f as a model document: keys in the format page's order, each
// tree array on one line, every number in Go's shortest round-trip form, so
// that the same Forest always gives the same bytes.
func (f *Forest) Encode(w io.Writer) error {
	bw := bufio.NewWriter(w)
	var err error
	put := func(s string) {
		if err == nil {
			_, err = bw.WriteString(s)
		}
	}
	str := func(s string) string {
		b, _ := json.Marshal(s)
		return string(b)
	}
	strs := func(list []string) string {
		b := []byte{'['}
		for i, s := range list {
			if i > 0 {
				b = append(b, ", "...)
			}
			b = append(b, str(s)...)
		}
		return string(append(b, ']'))
	}
	k := f.NumOutputs()
	put("{\n")
	put(fmt.Sprintf("  \"sawmill_forest\": %d,\n", FormatVersion))
	put("  \"task\": " + str(string(f.Task)) + ",\n")
	put("  \"features\": " + strs(f.Features) + ",\n")
	if f.Classes != nil {
		put("  \"classes\": " + strs(f.Classes) + ",\n")
	}
	put("  \"input_precision\": " + str(string(f.InputPrecision)) + ",\n")
	put("  \"combine\": " + str(string(f.Combine)) + ",\n")
	put("  \"output_transform\": " + str(string(f.Transform)) + ",\n")
	bs, e := floats(nil, f.BaseScore)
	if e != nil {
		return fmt.Errorf("base_score: %w", e)
	}
	put("  \"base_score\": " + string(bs) + ",\n")
	put("  \"trees\": [")
	for ti := range f.Trees {
		t := &f.Trees[ti]
		if ti > 0 {
			put(",")
		}
		put("\n    {\n")
		b := append([]byte(nil), "      \"feature\": "...)
		b = ints(b, t.Feature)
		b = append(b, ",\n      \"threshold\": "...)
		if b, e = floats(b, t.Threshold); e != nil {
			return fmt.Errorf("tree %d: threshold: %w", ti, e)
		}
		b = append(b, ",\n      \"left\": "...)
		b = ints(b, t.Left)
		b = append(b, ",\n      \"right\": "...)
		b = ints(b, t.Right)
		b = append(b, ",\n      \"missing_left\": ["...)
		for i, m := range t.MissingLeft {
			if i > 0 {
				b = append(b, ',')
			}
			b = strconv.AppendBool(b, m)
		}
		b = append(b, "],\n      \"value\": ["...)
		for i := 0; i < t.NumNodes(); i++ {
			if i > 0 {
				b = append(b, ',')
			}
			v := t.Value[i*k : (i+1)*k]
			if !t.IsLeaf(i) {
				v = make([]float64, k) // only leaves are read; keep splits tidy
			}
			if b, e = floats(b, v); e != nil {
				return fmt.Errorf("tree %d, node %d: value: %w", ti, i, e)
			}
		}
		b = append(b, "]\n    }"...)
		put(string(b))
	}
	put("\n  ]")
	if len(f.Provenance) > 0 {
		var ind bytes.Buffer
		if e := json.Indent(&ind, f.Provenance, "  ", "  "); e != nil {
			return fmt.Errorf("provenance: %w", e)
		}
		put(",\n  \"provenance\": " + ind.String())
	}
	put("\n}\n")
	if err != nil {
		return err
	}
	return bw.Flush()
}

func ints(b []byte, v []int) []byte {
	b = append(b, '[')
	for i, x := range v {
		if i > 0 {
			b = append(b, ',')
		}
		b = strconv.AppendInt(b, int64(x), 10)
	}
	return append(b, ']')
}

// floats appends v as a JSON array of shortest round-trip numbers.
func floats(b []byte, v []float64) ([]byte, error) {
	b = append(b, '[')
	for i, x := range v {
		if i > 0 {
			b = append(b, ',')
		}
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, fmt.Errorf("%v cannot be written in JSON", x)
		}
		b = strconv.AppendFloat(b, x, 'g', -1, 64)
	}
	return append(b, ']'), nil
}
