package compile

import (
	"bufio"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/forest"
)

// The text form of a Program has one line per node, so pass tests can be
// tables of before/after strings and `--dump-after PASS` can print it:
//
//	program classification outputs=3 combine=average transform=none compare=double base=0,0,0
//	feature "vibration_rms" used
//	class "healthy"
//	tree 0
//	  0 #0 x1 <= 61.5 missing=right ? 1 : 2
//	  1 #1 leaf 0.9,0.1,0
//	  2 #2 leaf 0.2,0.3,0.5
//
// Version 2 adds, only where they differ from the defaults, the program
// keys accumulate=float32, scale=S, match=truncate|exact, catround32=true,
// midpoints32=true,
// missing=LO,HI (the missing band) and zero=Z (the zero bound, default
// forest.ZeroMissingBound); "tree 4 output=2" for a tree of one output; set
// splits "x1 in {0,3,7}" in place of "x1 <= t"; and "missing=left+zero" on
// a zero_missing split.
//
// Each node line is its index, its model node id after '#', then either a
// split or a leaf. Numbers are Go's shortest round-trip form ("-0" kept).

// Format writes p's text form.
func Format(w io.Writer, p *Program) error {
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "program %s outputs=%d combine=%s transform=%s compare=%s base=%s",
		p.Task, p.NumOutputs, p.Combine, p.Transform, p.Compare, joinFloats(p.BaseScore))
	if p.Float32Accumulate() {
		fmt.Fprintf(bw, " accumulate=float32")
	}
	if p.Scale() != 1 {
		fmt.Fprintf(bw, " scale=%s", fmtFloat(p.TransformScale))
	}
	if p.CategoryMatch != "" && p.CategoryMatch != forest.MatchFloor {
		fmt.Fprintf(bw, " match=%s", p.CategoryMatch)
	}
	if p.CategoryRound32 {
		fmt.Fprintf(bw, " catround32=true")
	}
	if p.Midpoints32 {
		fmt.Fprintf(bw, " midpoints32=true")
	}
	if p.HasMissingValue {
		fmt.Fprintf(bw, " missing=%s,%s", fmtFloat(p.MissingLo), fmtFloat(p.MissingHi))
	}
	if p.ZeroBound != forest.ZeroMissingBound {
		fmt.Fprintf(bw, " zero=%s", fmtFloat(p.ZeroBound))
	}
	fmt.Fprintln(bw)
	for _, f := range p.Features {
		used := "unused"
		if f.Used {
			used = "used"
		}
		fmt.Fprintf(bw, "feature %s %s\n", strconv.Quote(f.Name), used)
	}
	for _, c := range p.Classes {
		fmt.Fprintf(bw, "class %s\n", strconv.Quote(c))
	}
	for _, t := range p.Trees {
		if t.HasOutput {
			fmt.Fprintf(bw, "tree %d output=%d\n", t.Source, t.Output)
		} else {
			fmt.Fprintf(bw, "tree %d\n", t.Source)
		}
		for i, n := range t.Nodes {
			if n.IsLeaf() {
				fmt.Fprintf(bw, "  %d #%d leaf %s\n", i, n.ID, joinFloats(n.Value))
				continue
			}
			miss := "right"
			if n.MissingLeft {
				miss = "left"
			}
			if n.ZeroMissing {
				miss += "+zero"
			}
			op, t := n.Op.String(), fmtFloat(n.Threshold)
			if n.IsSetSplit() {
				op, t = "in", fmtCategories(n.Categories)
			}
			fmt.Fprintf(bw, "  %d #%d x%d %s %s missing=%s ? %d : %d\n",
				i, n.ID, n.Feature, op, t, miss, n.Left, n.Right)
		}
	}
	return bw.Flush()
}

// String is the text form.
func (p *Program) String() string {
	var b strings.Builder
	Format(&b, p)
	return b.String()
}

func fmtFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

func fmtCategories(c []int32) string {
	s := make([]string, len(c))
	for i, x := range c {
		s[i] = strconv.Itoa(int(x))
	}
	return "{" + strings.Join(s, ",") + "}"
}

func joinFloats(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = fmtFloat(x)
	}
	return strings.Join(s, ",")
}

// Parse reads the text form back. It checks the result with Check.
func Parse(text string) (*Program, error) {
	p := &Program{}
	lines := strings.Split(text, "\n")
	for ln, line := range lines {
		where := func(format string, args ...any) error {
			return fmt.Errorf("line %d: %s", ln+1, fmt.Sprintf(format, args...))
		}
		line = strings.TrimSpace(line)
		if line == "" || strings.HasPrefix(line, "//") {
			continue
		}
		word, rest, _ := strings.Cut(line, " ")
		switch word {
		case "program":
			fs := strings.Fields(rest)
			if len(fs) == 0 {
				return nil, where("program needs a task")
			}
			p.Task = forest.Task(fs[0])
			p.Combine, p.Transform, p.Compare = forest.Sum, forest.NoTransform, Double
			p.ZeroBound = forest.ZeroMissingBound
			for _, kv := range fs[1:] {
				k, v, _ := strings.Cut(kv, "=")
				switch k {
				case "outputs":
					n, err := strconv.Atoi(v)
					if err != nil {
						return nil, where("outputs: %v", err)
					}
					p.NumOutputs = n
				case "combine":
					p.Combine = forest.Combine(v)
				case "transform":
					p.Transform = forest.Transform(v)
				case "compare":
					switch v {
					case "round32":
						p.Compare = Round32
					case "double":
						p.Compare = Double
					case "single":
						p.Compare = Single
					default:
						return nil, where("unknown compare %q", v)
					}
				case "accumulate":
					p.Accumulate = forest.Precision(v)
				case "scale", "zero":
					x, err := strconv.ParseFloat(v, 64)
					if err != nil {
						return nil, where("%s: %v", k, err)
					}
					if k == "scale" {
						p.TransformScale = x
					} else {
						p.ZeroBound = x
					}
				case "match":
					p.CategoryMatch = forest.CategoryMatch(v)
				case "catround32":
					p.CategoryRound32 = v == "true"
				case "midpoints32":
					p.Midpoints32 = v == "true"
				case "missing":
					b, err := parseFloats(v)
					if err != nil || len(b) != 2 {
						return nil, where("missing wants LO,HI, got %q", v)
					}
					p.HasMissingValue, p.MissingLo, p.MissingHi = true, b[0], b[1]
				case "base":
					b, err := parseFloats(v)
					if err != nil {
						return nil, where("base: %v", err)
					}
					p.BaseScore = b
				default:
					return nil, where("unknown key %q", k)
				}
			}
		case "feature", "class":
			name, tail, err := unquotePrefix(rest)
			if err != nil {
				return nil, where("%v", err)
			}
			if word == "class" {
				p.Classes = append(p.Classes, name)
			} else {
				p.Features = append(p.Features, Feature{Name: name, Used: strings.TrimSpace(tail) != "unused"})
			}
		case "tree":
			num, out, hasOut := strings.Cut(rest, " output=")
			src, err := strconv.Atoi(num)
			if err != nil {
				return nil, where("tree: %v", err)
			}
			t := Tree{Source: src, HasOutput: hasOut}
			if hasOut {
				if t.Output, err = strconv.Atoi(out); err != nil {
					return nil, where("tree output: %v", err)
				}
			}
			p.Trees = append(p.Trees, t)
		default:
			if len(p.Trees) == 0 {
				return nil, where("node before any tree")
			}
			n, err := parseNode(line, len(p.Trees[len(p.Trees)-1].Nodes))
			if err != nil {
				return nil, where("%v", err)
			}
			t := &p.Trees[len(p.Trees)-1]
			t.Nodes = append(t.Nodes, n)
		}
	}
	if p.BaseScore == nil {
		p.BaseScore = make([]float64, p.NumOutputs)
	}
	if err := Check(p); err != nil {
		return nil, err
	}
	return p, nil
}

func parseNode(line string, want int) (Node, error) {
	fs := strings.Fields(line)
	if len(fs) < 3 {
		return Node{}, fmt.Errorf("short node line %q", line)
	}
	idx, err := strconv.Atoi(fs[0])
	if err != nil || idx != want {
		return Node{}, fmt.Errorf("node index %q, want %d", fs[0], want)
	}
	if !strings.HasPrefix(fs[1], "#") {
		return Node{}, fmt.Errorf("node id %q must start with #", fs[1])
	}
	id, err := strconv.Atoi(fs[1][1:])
	if err != nil {
		return Node{}, fmt.Errorf("node id: %v", err)
	}
	if fs[2] == "leaf" {
		if len(fs) != 4 {
			return Node{}, fmt.Errorf("leaf needs one comma-separated vector")
		}
		v, err := parseFloats(fs[3])
		if err != nil {
			return Node{}, err
		}
		return Node{Feature: -1, Left: -1, Right: -1, Value: v, ID: int32(id)}, nil
	}
	// x<f> <op> <t> missing=<side> ? <l> : <r>
	if len(fs) != 10 || !strings.HasPrefix(fs[2], "x") || fs[6] != "?" || fs[8] != ":" {
		return Node{}, fmt.Errorf("split must read like \"0 #0 x1 <= 0.5 missing=right ? 1 : 2\", got %q", line)
	}
	n := Node{ID: int32(id)}
	if n.Feature, err = strconv.Atoi(fs[2][1:]); err != nil {
		return Node{}, fmt.Errorf("feature %q: %v", fs[2], err)
	}
	switch fs[3] {
	case "<=":
		n.Op = LE
	case "<":
		n.Op = LT
	case "in":
		if n.Categories, err = parseCategories(fs[4]); err != nil {
			return Node{}, err
		}
	default:
		return Node{}, fmt.Errorf("unknown op %q", fs[3])
	}
	if fs[3] != "in" {
		if n.Threshold, err = strconv.ParseFloat(fs[4], 64); err != nil {
			return Node{}, fmt.Errorf("threshold %q is not a number", fs[4])
		}
	}
	if side, ok := strings.CutSuffix(fs[5], "+zero"); ok {
		n.ZeroMissing = true
		fs[5] = side
	}
	switch fs[5] {
	case "missing=left":
		n.MissingLeft = true
	case "missing=right":
	default:
		return Node{}, fmt.Errorf("want missing=left or missing=right, got %q", fs[5])
	}
	l, err1 := strconv.Atoi(fs[7])
	r, err2 := strconv.Atoi(fs[9])
	if err1 != nil || err2 != nil {
		return Node{}, fmt.Errorf("child indices %q and %q", fs[7], fs[9])
	}
	n.Left, n.Right = int32(l), int32(r)
	return n, nil
}

func parseCategories(s string) ([]int32, error) {
	inner, ok := strings.CutPrefix(s, "{")
	if inner, ok = strings.CutSuffix(inner, "}"); !ok {
		return nil, fmt.Errorf("categories %q must read like {0,3,7}", s)
	}
	out := []int32{}
	if inner == "" {
		return out, nil
	}
	for _, x := range strings.Split(inner, ",") {
		c, err := strconv.ParseInt(x, 10, 32)
		if err != nil {
			return nil, fmt.Errorf("category %q is not an int32", x)
		}
		out = append(out, int32(c))
	}
	return out, nil
}

func parseFloats(s string) ([]float64, error) {
	if s == "" {
		return nil, nil
	}
	parts := strings.Split(s, ",")
	out := make([]float64, len(parts))
	for i, x := range parts {
		v, err := strconv.ParseFloat(x, 64)
		if err != nil {
			return nil, fmt.Errorf("%q is not a number", x)
		}
		out[i] = v
	}
	return out, nil
}

func unquotePrefix(s string) (string, string, error) {
	q, err := strconv.QuotedPrefix(s)
	if err != nil {
		return "", "", fmt.Errorf("expected a quoted name in %q", s)
	}
	name, _ := strconv.Unquote(q)
	return name, s[len(q):], nil
}
