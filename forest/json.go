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
	"reflect"
	"slices"
	"strconv"
	"strings"
	"unicode/utf8"
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

// fileDoc mirrors the document; pointer and RawMessage fields tell a missing
// key from a zero value.
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
	// Version 2.
	Accumulate     *string  `json:"accumulate"`
	TransformScale *float64 `json:"transform_scale"`
	Outputs        *int     `json:"outputs"`
	CategoryMatch  *string  `json:"category_match"`
	MissingValue   *float64 `json:"missing_value"`
}

type treeDoc struct {
	Feature     []int       `json:"feature"`
	Threshold   []float64   `json:"threshold"`
	Left        []int       `json:"left"`
	Right       []int       `json:"right"`
	MissingLeft []bool      `json:"missing_left"`
	Value       [][]float64 `json:"value"`
	// Version 2. Categories are read as numbers so that a fraction or a
	// huge value gets a message of its own rather than a type error.
	Output      *int        `json:"output"`
	Categories  [][]float64 `json:"categories"`
	ZeroMissing []bool      `json:"zero_missing"`
}

// v2Keys are the top-level and tree keys that need "sawmill_forest": 2.
var v2Keys = []string{"accumulate", "transform_scale", "outputs", "category_match", "missing_value"}
var v2TreeKeys = []string{"output", "categories", "zero_missing"}

// decodeStrict decodes one JSON document into v and rejects keys of its
// top-level object that v does not name, with the nearest known key as a
// hint. It returns a message without the file name, or "" on success.
// (json.Unmarshal, unlike a json.Decoder, holds no second copy of a large
// document.)
func decodeStrict(data []byte, v any, known []string) string {
	if err := json.Unmarshal(data, v); err != nil {
		return describeJSONError(data, err)
	}
	for _, key := range objectKeys(data) {
		if !slices.Contains(known, key) {
			return unknownKeyMessage(key, known)
		}
	}
	return ""
}

// objectKeys lists the keys of the object that valid JSON data holds (none
// when it holds something else), in order, skipping over the values without
// decoding them.
func objectKeys(data []byte) []string {
	i := skipSpace(data, 0)
	if i >= len(data) || data[i] != '{' {
		return nil
	}
	var keys []string
	i++
	for {
		i = skipSpace(data, i)
		if i >= len(data) || data[i] != '"' {
			return keys // '}' of an empty object
		}
		end := skipString(data, i)
		var key string
		if json.Unmarshal(data[i:end], &key) != nil {
			return keys
		}
		keys = append(keys, key)
		i = skipSpace(data, end)
		i = skipValue(data, skipSpace(data, i+1)) // past ':'
		i = skipSpace(data, i)
		if i >= len(data) || data[i] != ',' {
			return keys
		}
		i++
	}
}

func skipSpace(data []byte, i int) int {
	for i < len(data) && (data[i] == ' ' || data[i] == '\t' || data[i] == '\n' || data[i] == '\r') {
		i++
	}
	return i
}

// skipString returns the index after the string that starts at data[i].
func skipString(data []byte, i int) int {
	for i++; i < len(data); i++ {
		switch data[i] {
		case '\\':
			i++
		case '"':
			return i + 1
		}
	}
	return i
}

// skipValue returns the index after the value that starts at data[i]:
// strings are skipped whole, brackets counted, anything else runs to the
// next delimiter.
func skipValue(data []byte, i int) int {
	depth := 0
	for i < len(data) {
		switch data[i] {
		case '"':
			i = skipString(data, i)
			if depth == 0 {
				return i
			}
			continue
		case '{', '[':
			depth++
		case '}', ']':
			if depth == 0 {
				return i
			}
			depth--
			if depth == 0 {
				return i + 1
			}
		case ',':
			if depth == 0 {
				return i
			}
		}
		i++
	}
	return i
}

// jsonKeys lists the JSON keys of a struct's fields, in field order.
func jsonKeys(v any) []string {
	t := reflect.TypeOf(v)
	keys := make([]string, 0, t.NumField())
	for i := 0; i < t.NumField(); i++ {
		name, _, _ := strings.Cut(t.Field(i).Tag.Get("json"), ",")
		keys = append(keys, name)
	}
	return keys
}

var (
	fileKeys = jsonKeys(fileDoc{})
	treeKeys = jsonKeys(treeDoc{})
)

// unknownKeyMessage says that key is not one of known, with the nearest
// known key as a hint when one is close (an edit distance of at most a
// third of the key's length, and at least 2).
func unknownKeyMessage(key string, known []string) string {
	msg := fmt.Sprintf("unknown key %s", quoteName(key))
	best, bestD := "", -1
	for _, k := range known {
		if d := editDistance(key, k); bestD < 0 || d < bestD {
			best, bestD = k, d
		}
	}
	if bestD >= 0 && bestD <= max(2, utf8.RuneCountInString(key)/3) {
		return msg + fmt.Sprintf("\nhint: did you mean %q?", best)
	}
	return msg + "\nhint: the keys are " + strings.Join(known, ", ")
}

// editDistance is the Levenshtein distance between a and b in runes (one
// row of the dynamic programme; common practice). Keys longer than 64 runes
// are cut, so a hostile key costs little.
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	if len(ra) > 64 {
		ra = ra[:64]
	}
	row := make([]int, len(rb)+1)
	for j := range row {
		row[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		prev := row[0]
		row[0] = i
		for j := 1; j <= len(rb); j++ {
			cur := row[j]
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			row[j] = min(row[j]+1, row[j-1]+1, prev+cost)
			prev = cur
		}
	}
	return row[len(rb)]
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
	if msg := decodeStrict(data, &d, fileKeys); msg != "" {
		// A file of a newer version may have keys this reader does not
		// know: say that its version is the problem; and a JSON file of
		// another kind is no forest at all.
		var v struct {
			Version json.RawMessage `json:"sawmill_forest"`
		}
		if json.Unmarshal(data, &v) == nil {
			switch {
			case v.Version == nil:
				return nil, fmt.Errorf("%s: missing \"sawmill_forest\": not a sawmill forest file", name)
			case !knownVersion(v.Version):
				return nil, unsupportedVersion(name, v.Version)
			}
		}
		return nil, fmt.Errorf("%s: %s", name, msg)
	}
	var p Problems
	f := &Forest{}
	switch {
	case d.Version == nil:
		p.Add("%s: missing \"sawmill_forest\": not a sawmill forest file", name)
		return nil, p.Err()
	case !knownVersion(d.Version):
		return nil, unsupportedVersion(name, d.Version)
	}
	v2 := string(d.Version) == "2"
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
		if !v2 && (f.Transform == Exp || f.Transform == LogisticEach || f.Transform == Normalize) {
			p.Add("%s: output_transform %q needs \"sawmill_forest\": 2\nhint: write \"sawmill_forest\": 2", name, f.Transform)
		}
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
	// Version 2 keys, each with its default when absent.
	if !v2 {
		present := []bool{d.Accumulate != nil, d.TransformScale != nil, d.Outputs != nil, d.CategoryMatch != nil, d.MissingValue != nil}
		for i, ok := range present {
			if ok {
				p.Add("%s: %q needs \"sawmill_forest\": 2\nhint: write \"sawmill_forest\": 2", name, v2Keys[i])
			}
		}
	}
	f.Accumulate = Float64
	if d.Accumulate != nil {
		f.Accumulate = Precision(*d.Accumulate)
	}
	f.TransformScale = 1
	if d.TransformScale != nil {
		if *d.TransformScale == 0 {
			p.Add("%s: transform_scale is 0: it must be a finite non-zero number", name)
		}
		f.TransformScale = *d.TransformScale
	}
	if d.Outputs != nil {
		switch {
		case f.Task != Regression:
			p.Add("%s: \"outputs\" is for regression models only: a classifier has an output per class", name)
		case *d.Outputs < 1:
			p.Add("%s: outputs is %d: a model has at least one output", name, *d.Outputs)
		default:
			f.Outputs = *d.Outputs
		}
	} else if f.Task == Regression {
		f.Outputs = 1
	}
	f.CategoryMatch = MatchFloor
	if d.CategoryMatch != nil {
		f.CategoryMatch = CategoryMatch(*d.CategoryMatch)
	}
	if d.MissingValue != nil {
		f.HasMissingValue, f.MissingValue = true, *d.MissingValue
	}
	if p.Len() > 0 {
		return nil, p.Err()
	}
	k := f.NumOutputs()
	f.Trees = make([]Tree, len(d.Trees))
	var nodes, values int64
	var wrongLen map[int]map[int]int // tree -> node -> length found
	for ti, raw := range d.Trees {
		var td treeDoc
		if msg := decodeStrict(raw, &td, treeKeys); msg != "" {
			p.Add("%s: tree %d: %s", name, ti, msg)
			continue
		}
		d.Trees[ti] = nil // let the raw text go as soon as it is decoded
		if !v2 {
			for i, ok := range []bool{td.Output != nil, td.Categories != nil, td.ZeroMissing != nil} {
				if ok {
					p.Add("%s: tree %d: %q needs \"sawmill_forest\": 2\nhint: write \"sawmill_forest\": 2", name, ti, v2TreeKeys[i])
				}
			}
		}
		nodes += int64(len(td.Left))
		if nodes > maxNodes {
			p.Add("%s: tree %d: the model has more than %d nodes, the limit\nhint: raise the limit if the model is meant to be this large", name, ti, maxNodes)
			return nil, p.Err()
		}
		w := k
		if td.Output != nil {
			w = 1
		}
		values += int64(len(td.Left)) * int64(w)
		if values > valueBudget(len(data)) {
			p.Add("%s: tree %d: %d node slots of %d outputs each would take %d MiB, far more than a file of %d bytes holds: most value vectors are missing or short\nhint: give every node a value vector of %d entries, as the format asks",
				name, ti, len(td.Left), w, values*8>>20, len(data), w)
			return nil, p.Err()
		}
		var wl map[int]int
		f.Trees[ti], wl = treeFromDoc(&td, ti, w, name, &p)
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

func knownVersion(v json.RawMessage) bool { return string(v) == "1" || string(v) == "2" }

func unsupportedVersion(name string, v json.RawMessage) error {
	var p Problems
	p.Add("%s: sawmill_forest version %s is not supported (this reader knows versions 1 to %d)", name, v, FormatVersion)
	return p.Err()
}

// treeFromDoc checks the array lengths and flattens the value vectors (w
// entries each). Vectors of the wrong length are kept as zeros here;
// validate reports them at reachable leaves, the only place they are read.
// Set splits' thresholds become 0, categories and zero_missing at leaves are
// dropped, and arrays that say nothing (every entry null or false) become
// nil, so that the same model always reads to the same Forest.
func treeFromDoc(td *treeDoc, ti, w int, name string, p *Problems) (Tree, map[int]int) {
	n := len(td.Left)
	if td.MissingLeft == nil {
		td.MissingLeft = make([]bool, n)
	}
	type arrayLen struct {
		key string
		n   int
		nil bool // the key is absent, and required
	}
	lens := []arrayLen{
		{"feature", len(td.Feature), td.Feature == nil},
		{"threshold", len(td.Threshold), td.Threshold == nil},
		{"right", len(td.Right), td.Right == nil},
		{"missing_left", len(td.MissingLeft), false},
		{"value", len(td.Value), td.Value == nil},
	}
	if td.Categories != nil {
		lens = append(lens, arrayLen{"categories", len(td.Categories), false})
	}
	if td.ZeroMissing != nil {
		lens = append(lens, arrayLen{"zero_missing", len(td.ZeroMissing), false})
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
		Value:       make([]float64, n*w),
	}
	if td.Output != nil {
		t.HasOutput, t.Output = true, *td.Output
	}
	var wrong map[int]int
	for i, v := range td.Value {
		if len(v) == w {
			copy(t.Value[i*w:], v)
		} else if t.Left[i] == -1 {
			if wrong == nil {
				wrong = map[int]int{}
			}
			wrong[i] = len(v)
		}
	}
	td.Value = nil
	for i, z := range td.ZeroMissing {
		if z && t.Left[i] != -1 {
			t.ZeroMissing = td.ZeroMissing
			break
		}
	}
	for i := range t.ZeroMissing {
		if t.Left[i] == -1 {
			t.ZeroMissing[i] = false
		}
	}
	for i, c := range td.Categories {
		if c == nil || t.Left[i] == -1 {
			continue
		}
		if t.Categories == nil {
			t.Categories = make([][]int32, n)
		}
		cats := make([]int32, len(c))
		for j, v := range c {
			if !(v >= 0 && v < MaxCategory) || v != math.Trunc(v) {
				p.Add("%s: tree %d, node %d: categories holds %v, not an integer in [0, 2^31)", name, ti, i, v)
				return Tree{}, nil
			}
			cats[j] = int32(v)
		}
		t.Categories[i] = cats
		t.Threshold[i] = 0
	}
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
// that the same Forest always gives the same bytes. A model that uses nothing
// of version 2 is written as version 1, byte for byte as before version 2
// existed; otherwise as version 2, with each version 2 key written only when
// it differs from its default.
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
	put(fmt.Sprintf("  \"sawmill_forest\": %d,\n", f.Version()))
	put("  \"task\": " + str(string(f.Task)) + ",\n")
	put("  \"features\": " + strs(f.Features) + ",\n")
	if f.Classes != nil {
		put("  \"classes\": " + strs(f.Classes) + ",\n")
	}
	if f.Outputs > 1 {
		put(fmt.Sprintf("  \"outputs\": %d,\n", f.Outputs))
	}
	put("  \"input_precision\": " + str(string(f.InputPrecision)) + ",\n")
	if f.Accumulate == Float32 {
		put("  \"accumulate\": " + str(string(f.Accumulate)) + ",\n")
	}
	put("  \"combine\": " + str(string(f.Combine)) + ",\n")
	put("  \"output_transform\": " + str(string(f.Transform)) + ",\n")
	if s := f.Scale(); s != 1 {
		b, e := floats(nil, []float64{s})
		if e != nil {
			return fmt.Errorf("transform_scale: %w", e)
		}
		put("  \"transform_scale\": " + string(b[1:len(b)-1]) + ",\n")
	}
	if f.CategoryMatch != "" && f.CategoryMatch != MatchFloor {
		put("  \"category_match\": " + str(string(f.CategoryMatch)) + ",\n")
	}
	if f.HasMissingValue {
		b, e := floats(nil, []float64{f.MissingValue})
		if e != nil {
			return fmt.Errorf("missing_value: %w", e)
		}
		put("  \"missing_value\": " + string(b[1:len(b)-1]) + ",\n")
	}
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
		var b []byte
		if t.HasOutput {
			b = append(b, "      \"output\": "...)
			b = strconv.AppendInt(b, int64(t.Output), 10)
			b = append(b, ",\n"...)
		}
		b = append(b, "      \"feature\": "...)
		b = ints(b, t.Feature)
		b = append(b, ",\n      \"threshold\": "...)
		th := t.Threshold
		if t.Categories != nil { // set splits' thresholds are written as 0
			th = slices.Clone(th)
			for i := range th {
				if t.IsSetSplit(i) {
					th[i] = 0
				}
			}
		}
		if b, e = floats(b, th); e != nil {
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
		b = append(b, ']')
		if t.ZeroMissing != nil {
			b = append(b, ",\n      \"zero_missing\": ["...)
			for i, z := range t.ZeroMissing {
				if i > 0 {
					b = append(b, ',')
				}
				b = strconv.AppendBool(b, z && !t.IsLeaf(i))
			}
			b = append(b, ']')
		}
		if t.Categories != nil {
			b = append(b, ",\n      \"categories\": ["...)
			for i, c := range t.Categories {
				if i > 0 {
					b = append(b, ',')
				}
				if c == nil || t.IsLeaf(i) {
					b = append(b, "null"...)
					continue
				}
				b = append(b, '[')
				for j, v := range c {
					if j > 0 {
						b = append(b, ',')
					}
					b = strconv.AppendInt(b, int64(v), 10)
				}
				b = append(b, ']')
			}
			b = append(b, ']')
		}
		b = append(b, ",\n      \"value\": ["...)
		w := t.Width(k)
		for i := 0; i < t.NumNodes(); i++ {
			if i > 0 {
				b = append(b, ',')
			}
			v := t.Value[i*w : (i+1)*w]
			if !t.IsLeaf(i) {
				v = make([]float64, w) // only leaves are read; keep splits tidy
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
