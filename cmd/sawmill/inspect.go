package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"
	"unicode/utf8"

	"github.com/spf13/cobra"

	"github.com/sawmill-dev/sawmill/forest"
)

func newInspectCmd() *cobra.Command {
	var asJSON, cSizes bool
	var intLeaves int
	c := &cobra.Command{
		Use:   "inspect MODEL.json [--json]",
		Short: "Show what is in a model: trees, nodes, depth, features, sizes",
		Long: `Read and validate a model file and describe it: the number of trees,
nodes and leaves, tree depths, which features the splits use and how often,
the outputs and classes, how trees are combined, the output transform, the
input precision, the provenance, and the file size. For a model of format
version 2 it also names the version 2 keys in use and what they say: the
accumulation precision, the transform scale, set splits and their category
rule, splits where zeros count as missing, the missing-value sentinel, and
the trees that add to one output.

Only nodes reachable from a tree's root are counted.`,
		Example: `  sawmill inspect pump-health.json
  sawmill inspect pump-health.json --json
  sawmill inspect pump-health.json --c-sizes`,
		Args: exactArgs(1, "one model file"),
		RunE: func(c *cobra.Command, args []string) error {
			if err := runInspect(c.OutOrStdout(), args[0], asJSON); err != nil {
				return err
			}
			if !asJSON {
				if err := printSource(c.OutOrStdout(), args[0]); err != nil {
					return err
				}
			}
			if !cSizes {
				return nil
			}
			f, err := readModel(args[0])
			if err != nil {
				return err
			}
			return printCSizes(c.Context(), c.OutOrStdout(), args[0], f, intLeaves)
		},
	}
	c.Flags().BoolVar(&asJSON, "json", false, "print the description as JSON")
	c.Flags().IntVar(&intLeaves, "int-leaves", 0, "with --c-sizes, also the double build with leaves as scaled integers of 16 or 32 bits (compile --int-leaves, lossy)")
	c.Flags().BoolVar(&cSizes, "c-sizes", false, "also print per C layout the tables' bytes, the most splits a prediction tests and, with arm-none-eabi-gcc, Cortex-M4 flash and stack, and with QEMU instructions per prediction on a Cortex-M4 and M0")
	return c
}

// stats describes a forest's shape, over reachable nodes only.
type stats struct {
	nodes, leaves      int
	depthMin, depthMax int
	depthMean          float64
	splits             []int // per feature, the number of splits that test it
	// version 2: set splits, splits where zeros count as missing, trees
	// that add to one output
	setSplits, zeroMissing, outputTrees int
}

// forestStats walks every tree with an explicit stack: trees can be far too
// deep for recursion.
func forestStats(f *forest.Forest) stats {
	st := stats{splits: make([]int, len(f.Features)), depthMin: -1}
	type item struct{ node, depth int }
	var stack []item
	sum := 0
	for ti := range f.Trees {
		t := &f.Trees[ti]
		deepest := 0
		stack = append(stack[:0], item{0, 0})
		for len(stack) > 0 {
			it := stack[len(stack)-1]
			stack = stack[:len(stack)-1]
			st.nodes++
			if t.IsLeaf(it.node) {
				st.leaves++
				deepest = max(deepest, it.depth)
				continue
			}
			st.splits[t.Feature[it.node]]++
			if t.IsSetSplit(it.node) {
				st.setSplits++
			}
			if t.ZeroMissing != nil && t.ZeroMissing[it.node] {
				st.zeroMissing++
			}
			stack = append(stack, item{t.Right[it.node], it.depth + 1}, item{t.Left[it.node], it.depth + 1})
		}
		sum += deepest
		if t.HasOutput {
			st.outputTrees++
		}
		st.depthMax = max(st.depthMax, deepest)
		if st.depthMin < 0 || deepest < st.depthMin {
			st.depthMin = deepest
		}
	}
	if len(f.Trees) > 0 {
		st.depthMean = float64(sum) / float64(len(f.Trees))
	}
	st.depthMin = max(st.depthMin, 0)
	return st
}

type inspectFeature struct {
	Name   string `json:"name"`
	Splits int    `json:"splits"`
}

type inspectDepth struct {
	Min  int     `json:"min"`
	Mean float64 `json:"mean"`
	Max  int     `json:"max"`
}

type inspectDoc struct {
	File           string           `json:"file"`
	Bytes          int64            `json:"bytes"`
	Task           forest.Task      `json:"task"`
	Trees          int              `json:"trees"`
	Nodes          int              `json:"nodes"`
	Leaves         int              `json:"leaves"`
	Depth          inspectDepth     `json:"depth"`
	Features       []inspectFeature `json:"features"`
	FeaturesUsed   int              `json:"features_used"`
	Outputs        int              `json:"outputs"`
	Classes        []string         `json:"classes,omitempty"`
	Combine        forest.Combine   `json:"combine"`
	Transform      forest.Transform `json:"output_transform"`
	InputPrecision forest.Precision `json:"input_precision"`
	BaseScore      []float64        `json:"base_score"`
	Provenance     json.RawMessage  `json:"provenance,omitempty"`
	// Format version 2: the version a writer gives the model, the version 2
	// keys in use and what they say.
	FormatVersion  int                  `json:"format_version"`
	V2             []string             `json:"v2_keys,omitempty"`
	Accumulate     forest.Precision     `json:"accumulate,omitempty"`
	TransformScale float64              `json:"transform_scale,omitempty"`
	CategoryMatch  forest.CategoryMatch `json:"category_match,omitempty"`
	MissingValue   *float64             `json:"missing_value,omitempty"`
	SetSplits      int                  `json:"set_splits,omitempty"`
	ZeroMissing    int                  `json:"zero_missing_splits,omitempty"`
	OutputTrees    int                  `json:"per_output_trees,omitempty"`
}

func runInspect(w io.Writer, path string, asJSON bool) error {
	fi, err := os.Stat(path)
	if err != nil {
		return located(path, err)
	}
	f, err := readModel(path)
	if err != nil {
		return err
	}
	st := forestStats(f)
	doc := inspectDoc{
		File: path, Bytes: fi.Size(), Task: f.Task,
		Trees: len(f.Trees), Nodes: st.nodes, Leaves: st.leaves,
		Depth:   inspectDepth{Min: st.depthMin, Mean: st.depthMean, Max: st.depthMax},
		Outputs: f.NumOutputs(), Classes: f.Classes,
		Combine: f.Combine, Transform: f.Transform, InputPrecision: f.InputPrecision,
		BaseScore: f.BaseScore, Provenance: f.Provenance,
	}
	doc.FormatVersion, doc.V2 = f.Version(), f.V2Constructs()
	if doc.FormatVersion > 1 {
		doc.Accumulate, doc.TransformScale, doc.CategoryMatch = f.Accumulate, f.Scale(), f.CategoryMatch
		if f.HasMissingValue {
			doc.MissingValue = &f.MissingValue
		}
		doc.SetSplits, doc.ZeroMissing, doc.OutputTrees = st.setSplits, st.zeroMissing, st.outputTrees
	}
	for i, name := range f.Features {
		doc.Features = append(doc.Features, inspectFeature{Name: name, Splits: st.splits[i]})
		if st.splits[i] > 0 {
			doc.FeaturesUsed++
		}
	}
	if asJSON {
		b, err := json.MarshalIndent(doc, "", "  ")
		if err != nil {
			return fmt.Errorf("BUG: inspect: %v", err)
		}
		_, err = fmt.Fprintf(w, "%s\n", b)
		return err
	}
	return printInspect(w, &doc)
}

func printInspect(w io.Writer, d *inspectDoc) error {
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	row := func(k, format string, a ...any) { fmt.Fprintf(tw, "%s\t"+format+"\n", append([]any{k}, a...)...) }
	size := fmt.Sprintf("%d bytes", d.Bytes)
	if d.Bytes >= 1<<10 {
		size += " (" + byteSize(d.Bytes) + ")"
	}
	row("file", "%s, %s", d.File, size)
	row("task", "%s", d.Task)
	row("trees", "%d", d.Trees)
	row("nodes", "%d (%s, %s)", d.Nodes, plural(d.Nodes-d.Leaves, "split"), plural(d.Leaves, "leaf"))
	row("depth", "min %d, mean %.1f, max %d", d.Depth.Min, d.Depth.Mean, d.Depth.Max)
	row("outputs", "%d", d.Outputs)
	if d.Classes != nil {
		row("classes", "%s", strings.Join(quoteAll(d.Classes), ", "))
	}
	row("combine", "%s", d.Combine)
	row("transform", "%s", d.Transform)
	row("precision", "%s", d.InputPrecision)
	if nonZero(d.BaseScore) {
		row("base score", "%s", floatList(d.BaseScore))
	}
	if d.FormatVersion > 1 {
		row("format", "version 2: %s", strings.Join(d.V2, ", "))
		row("accumulate", "%s", d.Accumulate)
		if d.TransformScale != 1 {
			row("scale", "%s", num(d.TransformScale))
		}
		if d.SetSplits > 0 {
			row("set splits", "%d, category_match %s", d.SetSplits, d.CategoryMatch)
		} else if d.CategoryMatch != forest.MatchFloor {
			row("category match", "%s (no set splits)", d.CategoryMatch)
		}
		if d.ZeroMissing > 0 {
			row("zero missing", "%s where |x| <= %s counts as missing", plural(d.ZeroMissing, "split"), num(forest.ZeroMissingBound))
		}
		if d.MissingValue != nil {
			row("missing value", "%s counts as missing in every input", num(*d.MissingValue))
		}
		if d.OutputTrees > 0 {
			row("output trees", "%d of %d trees add to one output each", d.OutputTrees, d.Trees)
		}
	}
	row("features", "%d, %d used", len(d.Features), d.FeaturesUsed)
	if err := tw.Flush(); err != nil {
		return err
	}
	nameW, countW := 0, 0
	counts := make([]string, len(d.Features))
	for i, ft := range d.Features {
		counts[i] = "unused"
		if ft.Splits > 0 {
			counts[i] = plural(ft.Splits, "split")
		}
		nameW = max(nameW, utf8.RuneCountInString(ft.Name))
		countW = max(countW, len(counts[i]))
	}
	for i, ft := range d.Features {
		pad := strings.Repeat(" ", nameW-utf8.RuneCountInString(ft.Name))
		fmt.Fprintf(w, "  %s%s  %*s\n", ft.Name, pad, countW, counts[i])
	}
	if len(d.Provenance) == 0 {
		return nil
	}
	fmt.Fprintln(w, "provenance")
	tw = tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	keys, vals, err := objectFields(d.Provenance)
	if err != nil {
		fmt.Fprintf(tw, "  %s\n", shorten(string(d.Provenance), 76))
	}
	for i, k := range keys {
		for j, line := range strings.Split(provenanceValue(k, vals[i]), "\n") {
			if j > 0 {
				k = ""
			}
			fmt.Fprintf(tw, "  %s\t%s\n", k, line)
		}
	}
	return tw.Flush()
}

// provenanceValue summarises one provenance entry on one line: sawmill's
// own keys readably, anything else as compact JSON, shortened.
func provenanceValue(key string, v json.RawMessage) string {
	switch key {
	case "settings":
		if keys, vals, err := objectFields(v); err == nil {
			parts := make([]string, len(keys))
			for i, k := range keys {
				parts[i] = k + "=" + strings.Trim(numberValue(vals[i]), `"`)
			}
			return wrapWords(parts, 64)
		}
	case "oob_curve":
		var c struct {
			Trees []int     `json:"trees"`
			Error []float64 `json:"error"`
		}
		if json.Unmarshal(v, &c) == nil && len(c.Trees) > 0 && len(c.Trees) == len(c.Error) {
			last := len(c.Trees) - 1
			return fmt.Sprintf("%.4g after %s, %.4g after %s (%d points)",
				c.Error[0], plural(c.Trees[0], "tree"), c.Error[last], plural(c.Trees[last], "tree"), len(c.Trees))
		}
	case "importance":
		var imp struct {
			Increase json.RawMessage `json:"increase"`
		}
		if json.Unmarshal(v, &imp) == nil && imp.Increase != nil {
			if keys, vals, err := objectFields(imp.Increase); err == nil {
				type kv struct {
					k string
					v float64
				}
				var list []kv
				for i, k := range keys {
					var x float64
					if json.Unmarshal(vals[i], &x) == nil {
						list = append(list, kv{k, x})
					}
				}
				slices.SortStableFunc(list, func(a, b kv) int { return cmpDesc(a.v, b.v) })
				parts := []string{"top:"}
				for i, e := range list[:min(5, len(list))] {
					sep := ","
					if i == min(5, len(list))-1 {
						sep = ""
					}
					parts = append(parts, fmt.Sprintf("%s %.4g%s", e.k, e.v, sep))
				}
				return wrapWords(parts, 64)
			}
		}
	}
	return shorten(numberValue(v), 76)
}

// numberValue prints a JSON number that is not a whole number with four
// significant digits (0.3659, not 0.3659200000000001); anything else as
// it is.
func numberValue(v json.RawMessage) string {
	x, err := strconv.ParseFloat(string(v), 64)
	if err != nil || x == math.Trunc(x) {
		return string(v)
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

// wrapWords joins words with spaces into lines of at most width runes
// (a longer word gets a line of its own): nothing is cut.
func wrapWords(words []string, width int) string {
	var b strings.Builder
	n := 0
	for _, w := range words {
		l := utf8.RuneCountInString(w)
		switch {
		case n == 0:
		case n+1+l > width:
			b.WriteByte('\n')
			n = 0
		default:
			b.WriteByte(' ')
			n++
		}
		b.WriteString(w)
		n += l
	}
	return b.String()
}

func cmpDesc(a, b float64) int {
	switch {
	case a > b:
		return -1
	case a < b:
		return 1
	}
	return 0
}

func plural(n int, word string) string {
	switch {
	case n == 1:
		return "1 " + word
	case word == "leaf":
		return fmt.Sprintf("%d leaves", n)
	}
	return fmt.Sprintf("%d %ss", n, word)
}

// objectFields lists a JSON object's keys in document order, each with its
// compact value.
func objectFields(raw json.RawMessage) (keys []string, vals []json.RawMessage, err error) {
	dec := json.NewDecoder(bytes.NewReader(raw))
	if tok, err := dec.Token(); err != nil || tok != json.Delim('{') {
		return nil, nil, fmt.Errorf("not an object")
	}
	for dec.More() {
		tok, err := dec.Token()
		if err != nil {
			return nil, nil, err
		}
		var v json.RawMessage
		if err := dec.Decode(&v); err != nil {
			return nil, nil, err
		}
		var c bytes.Buffer
		if json.Compact(&c, v) == nil {
			v = c.Bytes()
		}
		keys = append(keys, fmt.Sprint(tok))
		vals = append(vals, v)
	}
	return keys, vals, nil
}

func shorten(s string, n int) string {
	r := []rune(s)
	if len(r) <= n {
		return s
	}
	return string(r[:n-1]) + "…"
}

func quoteAll(s []string) []string {
	q := make([]string, len(s))
	for i, x := range s {
		b, _ := json.Marshal(x)
		q[i] = string(b)
	}
	return q
}

func nonZero(v []float64) bool {
	for _, x := range v {
		if x != 0 {
			return true
		}
	}
	return false
}

func floatList(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = num(x)
	}
	return strings.Join(s, ", ")
}

func byteSize(n int64) string {
	switch {
	case n >= 1<<30:
		return fmt.Sprintf("%.1f GiB", float64(n)/(1<<30))
	case n >= 1<<20:
		return fmt.Sprintf("%.1f MiB", float64(n)/(1<<20))
	case n >= 1<<10:
		return fmt.Sprintf("%.1f KiB", float64(n)/(1<<10))
	}
	return fmt.Sprintf("%d bytes", n)
}
