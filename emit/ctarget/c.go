// Package ctarget emits a compiled forest as C99: NAME.h, declaring the API and
// documenting the model, and NAME.c, the scorer. The code needs no heap, no
// recursion and nothing beyond the C standard library (math.h only when a
// transform needs exp); every table is static const.
//
// Besides NAME_predict (one row) and NAME_predict_class, NAME_predict_batch
// scores n rows laid out one after another. In the table layout it walks
// tree by tree over all rows, four rows at once, a lane taking the next row
// as soon as its walk ends, so that a tree's words stay in cache while the
// rows pass, where NAME_predict walks every tree for one row; each row's
// leaves are still added in tree order, so the outputs are NAME_predict's
// bit for bit (the golden drivers check it on every case).
// In the nested layout it is a loop over NAME_predict. With Options.Threads,
// NAME_threads.h and NAME_threads.c add NAME_predict_batch_threads, which
// hands contiguous parts of the rows to NAME_predict_batch on POSIX threads;
// NAME.h and NAME.c are the same with or without it, so a build without
// threads leaves the two files out.
//
// Two arithmetic modes exist. Double (the default) takes and returns double
// and is bit-exact with the forest interpreter: the same comparisons, the same
// additions in the same order, the average divided by the number of trees
// (not multiplied by its inverse), and exp from libm in the transforms (which
// may differ from Go's math.Exp in the last bit). Float (Options.Float) takes
// and returns float for FPUs without double: its program must be compiled with
// compile.Options{SingleInputs: true}, so every threshold is a float32 value
// and the comparisons are exact for float inputs; leaves are rounded to float
// and accumulated in float, and the transforms use expf.
//
// Layouts (Options.Layout):
//
//   - nested: one static function per tree, if/else to depth 100 and a flat
//     goto form for deeper trees (C guarantees only 127 nesting levels);
//   - table: static const arrays walked by one loop. Splits are packed words
//     in preorder, one per split, with the left child implicit (the next
//     word) and only the size of the left subtree stored; leaves take no word
//     (their preorder position is counted on the way down) and index a table
//     of the distinct leaf vectors; thresholds come from per-feature tables
//     of the distinct values;
//   - binned: the table layout's walk over integers. Each used feature's
//     input is mapped once per row to a bin (a binary search on the IEEE
//     bits, as integers, of the distinct thresholds it is compared with),
//     and the splits compare bins: no floating-point operation before the
//     leaves, exact for every input, split words of the fewest bytes
//     (24-bit words as a uint16_t and a uint8_t array); see binned.go. Set
//     splits are refused (emit.Unsupported);
//   - bitvector: QuickScorer's bit-vector traversal (Lucchese et al., SIGIR
//     2015; see Bitvector), for trees of up to 64 leaves; asked for only
//     (auto does not choose it yet), and where bitvectorFits refuses the
//     model (set splits, missing bands, trees of one output among several,
//     bigger trees) the table layout is written instead, the header saying
//     why;
//   - block: the table layout's NAME_predict, and a NAME_predict_batch that
//     walks blocks of rows tree by tree without branches on the data, for
//     trees of any depth (Asadi, Lin & de Vries, IEEE TKDE 2014; see Block):
//     doubled keys, compact nodes, eight rows interleaved; asked for only
//     (see docs/batch-layouts.md for why auto does not choose it), and where
//     blockFits refuses the model (set splits, missing bands, zero as
//     missing, per-output trees, more than BlockMaxFeatures features) the
//     table layout is written instead, the header saying why;
//   - perfect: auto's NAME_predict (nested or table), and a
//     NAME_predict_batch that pads every tree to a perfect tree of the forest's depth (node
//     i's children 2i+1 and 2i+2, no links) and walks blocks of rows through
//     exactly that many steps without branches on the data (see Perfect);
//     asked for only, and where perfectFits refuses the model (what block
//     refuses, and forests deeper than PerfectMaxDepth or padded to more
//     than four times their nodes and 4,096) the table layout instead, the header
//     saying why;
//   - auto: nested up to AutoNestedNodes nodes and AutoNestedTreeNodes per
//     tree, else binned where its tables are smaller than table's (thresholds
//     that repeat, as with train --max-bins), else table.
//
// Options.Pack stores the table and binned layouts' split words, leaf rows
// and class counts at the bits the model needs, and the binned cuts as
// offsets from each feature's least, in uint32_t arrays read with aligned
// loads (packbits.go, packcuts.go): the same outputs, 4 to 26% fewer table
// bytes, more instructions a prediction; asked for, or picked by a flash
// budget.
//
// One option is lossy, and only on request: Options.IntLeaves (16 or 32)
// stores each leaf as a scaled integer, sums them in integers
// (NAME_predict_scaled) and derives, prints in the header and hands verify
// a bound on every output's error (intleaves.go); with the binned layout
// the class label then needs no floating point at all. Tables and binned
// only: auto picks binned.
//
// Options.ConstantTime writes the binned layout so that every prediction
// executes the same instructions (consttime.go): each feature's bin found
// in a fixed number of steps, each tree walked exactly its depth (a leaf
// reached early steps to itself), NaN, the bands and the rounding of a
// double to a float computed with masks, the logistic's sign chosen by a
// mask. The leaf sums and exp take the FPU's or the run-time library's
// time. Other layouts and set splits are refused. The header of every
// layout states the most splits a prediction tests (WorstSplits), in
// constant time the exact count, and names sawmill inspect --c-sizes for
// flash, RAM, stack and instructions, which need a compiler.
package ctarget

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// Options controls the emitted C.
type Options struct {
	// Name prefixes the files (NAME.h, NAME.c) and every external symbol; a
	// C identifier of ASCII letters, digits and single underscores, starting
	// with a letter. Default "model".
	Name string
	// Layout is emit.Auto (the default when empty), emit.Nested or
	// emit.Table.
	Layout string
	// Float makes the API and the arithmetic float instead of double. The
	// program must have been compiled with compile.Options{SingleInputs: true}.
	Float bool
	// Version is the sawmill version the headers name; emit.Version when
	// empty.
	Version string
	// Comments is the comment knob (emit.NodeComments): 0 writes a comment
	// per node for programs of at most emit.CommentNodes nodes, 1 always,
	// -1 never.
	Comments int
	// Threads also writes NAME_threads.h and NAME_threads.c:
	// NAME_predict_batch_threads, NAME_predict_batch on POSIX threads, in
	// files of their own that a build without threads leaves out.
	Threads bool
	// LeafValues keeps a classification forest's leaf values as numbers in
	// the table and binned layouts, where they would otherwise be stored
	// as class counts and divided at run time (counts.go): no division per
	// tree and output, at two to eight times the bytes of a leaf row.
	LeafValues bool
	// IntLeaves, 16 or 32, stores every leaf as a scaled integer of that
	// many bits and sums them in integers (intleaves.go): lossy, within a
	// bound derived from the model and written in the header. 0 keeps the
	// exact floating-point leaves. Table and binned layouts only.
	IntLeaves int
	// ConstantTime walks every prediction the same path: the binned layout
	// with fixed-step searches and walks and selects in place of branches
	// (consttime.go). Other layouts are refused.
	ConstantTime bool
	// BlockChunkBytes bounds the node tables of a chunk of trees in the
	// block layout's chained walk (chain.go): 0 is 48 KiB, tuned on an AMD
	// EPYC with 32 KiB of first-level and 1 MiB of second-level cache per
	// core; a machine with other caches may want another, and tests set 1
	// for a tree a chunk.
	BlockChunkBytes int
	// Facts are lines about the compiled code measured outside the emitter
	// (flash, stack, instructions on boards: sawmill compile
	// --board-facts), written in the header in place of the pointer to
	// sawmill inspect --c-sizes. Emitting runs no compiler itself.
	Facts []string
	// Pack stores the table and binned layouts' split words, leaf rows and
	// class counts at the bits the model needs, in packed uint32_t arrays
	// read with aligned loads (packbits.go): fewer bytes, a few more
	// instructions a field. Ignored with ConstantTime.
	Pack bool
}

// Prefix is the prefix of the files and symbols: Name, or "model" when
// Name is empty.
func (o Options) Prefix() string {
	if o.Name == "" {
		return "model"
	}
	return o.Name
}

// AutoNestedNodes is the largest forest, in nodes, that auto emits nested.
// gcc -O2 needs about 0.2 ms per node of nested code in one translation unit
// (limits.md, section 4a), so 50,000 nodes build in about 10 s; past that the
// table layout builds in well under a second per 100,000 nodes.
const AutoNestedNodes = 50000

// AutoNestedTreeNodes is the largest single tree auto emits nested: gcc's
// optimiser is superlinear in the size of one function, and a tree is one
// function (a 200,000-node tree took gcc -O2 minutes).
const AutoNestedTreeNodes = 20000

// MaxNesting is the deepest tree emitted as nested if/else; deeper trees get
// the flat goto form. C99 (5.2.4.1) guarantees 127 nested blocks, clang's
// default bracket depth is 256.
const MaxNesting = 100

// Name is the target's name on the command line and in reports.
const Name = "c"

// Target is the C target's entry in the registry (emit/targets): its float
// build takes float32 inputs.
func Target() emit.Target {
	return emit.Target{Name: Name, Layouts: Layouts(), Float: true, Emit: func(p *compile.Program, s emit.Settings) ([]emit.File, error) {
		return Emit(p, Options{Name: s.Name, Layout: s.Layout, Float: s.Float, Comments: s.Comments})
	}}
}

// Resolve returns the layout Emit writes p in under o, and why.
func Resolve(p *compile.Program, o Options) (string, string, error) {
	if o.ConstantTime && o.IntLeaves != 0 {
		return "", "", fmt.Errorf("ctarget: constant time and integer leaves together are not built: choose one")
	}
	if o.ConstantTime {
		return resolveConstantTime(p, o)
	}
	if o.IntLeaves != 0 {
		return resolveIntLeaves(p, o)
	}
	return resolveLayout(p, o)
}

// resolveLayout is Resolve for floating-point leaves.
func resolveLayout(p *compile.Program, o Options) (string, string, error) {
	switch o.Layout {
	case emit.Nested, emit.Table:
		return o.Layout, "asked for", nil
	case emit.Binned:
		var u *emit.Unsupported
		if errors.As(binnable(p), &u) {
			return emit.Table, fmt.Sprintf("binned asked for, but %s is a set split, which no cut of one feature can test: the table layout instead", u.Where), nil
		}
		return emit.Binned, "asked for", nil
	case Bitvector:
		if err := bitvectorFits(p); err != nil {
			return emit.Table, fmt.Sprintf("bitvector asked for, but %v: the table layout instead", err), nil
		}
		return Bitvector, "asked for", nil
	case Block:
		l, why := blockResolve(p, o)
		return l, why, nil
	case Perfect:
		l, why := perfectResolve(p, o)
		return l, why, nil
	case Batch:
		return batchResolve(p, o)
	case "", emit.Auto:
		n, biggest := p.NumNodes(), 0
		for i := range p.Trees {
			biggest = max(biggest, len(p.Trees[i].Nodes))
		}
		if biggest > AutoNestedTreeNodes {
			return tableOrBinned(p, o, fmt.Sprintf("a tree of %d nodes, more than %d: one function that size builds slowly", biggest, AutoNestedTreeNodes))
		}
		if n <= AutoNestedNodes {
			return emit.Nested, fmt.Sprintf("%d nodes, at most %d: nested code is fastest and builds quickly", n, AutoNestedNodes), nil
		}
		return tableOrBinned(p, o, fmt.Sprintf("%d nodes, more than %d: tables build in seconds where nested code would take minutes", n, AutoNestedNodes))
	}
	return "", "", emit.UnknownLayout(Name, o.Layout, append(Layouts(), Batch))
}

// Emit returns NAME.h and NAME.c for p.
func Emit(p *compile.Program, o Options) ([]emit.File, error) {
	g, err := newGen(p, o)
	if err != nil {
		return nil, err
	}
	var body printer
	switch g.layout {
	case emit.Nested:
		g.nested(&body)
	case emit.Table:
		if err := g.table(&body); err != nil {
			return nil, err
		}
	case emit.Binned:
		if err := g.binned(&body); err != nil {
			return nil, err
		}
	case Bitvector:
		g.bitvector(&body)
	case Block:
		if err := g.block(&body); err != nil {
			return nil, err
		}
	case Perfect:
		if err := g.perfect(&body); err != nil {
			return nil, err
		}
	default:
		panic("BUG: ctarget: layout " + g.layout)
	}
	if g.il != nil {
		g.finishScaled(&body)
	} else {
		g.finish(&body)
	}
	g.writeBatch(&body)
	files := []emit.File{
		{Name: g.name + ".h", Data: g.header()},
		{Name: g.name + ".c", Data: g.source(body.bytes())},
	}
	if o.Threads {
		files = append(files, g.threadsFiles()...)
	}
	return files, nil
}

// gen carries what every part of the output needs.
type gen struct {
	p      *compile.Program
	o      Options
	name   string // lower-case-or-as-given prefix of functions and tables
	upper  string // upper-case prefix of macros
	layout string
	why    string
	ft     string // "double" or "float": the API's type, of inputs and outputs
	// at is the accumulator's type: "float" under float32 accumulation or
	// in float mode, else "double".
	at string
	// f32 is the program's float32 accumulation: every joining operation,
	// the scale and the transform in float, one operation per statement.
	f32 bool
	// sets numbers the distinct category lists of the set splits.
	sets *setTable
	// leaves holds every leaf value as the target computes with it (rounded to
	// float when the accumulator is float), by tree and node.
	leaves   [][][]float64
	base     []float64
	tables   []Table // static tables of NAME.c, for the size report
	comments bool
	// tableMode forces the table layout's leaf mode in tests: 1 leaves
	// outside the words, 2 leaf rows in the words, 3 leaves outside and one
	// threshold per split (inline); 0 chooses the smallest.
	tableMode int
	// batch, set by the table layout, writes NAME_predict_batch; nil
	// writes it as a loop over NAME_predict.
	batch func(w *printer)
	// pf is the perfect layout's padded forest, set by it for the header.
	pf *perfectForest
	// ct holds the constant-time counts the header states, or nil.
	ct       *ctFacts
	featMac  []string // NAME_F_... macro per feature
	classMac []string // NAME_C_... macro per class
	// il is the integer leaves' scale and bound (Options.IntLeaves), or nil.
	il *intLeaves
	// fieldWritten: NAME_field, the packed arrays' reader, is written.
	fieldWritten bool
}

// Table is one static array of the generated code.
type Table struct {
	Name      string // the C identifier
	What      string // what it holds
	Len       int    // elements
	ElemBytes int    // bytes per element
}

// Bytes is the array's size.
func (t Table) Bytes() int { return t.Len * t.ElemBytes }

func newGen(p *compile.Program, o Options) (*gen, error) {
	if err := emit.CheckProgram(Target(), p, o.Float); err != nil {
		return nil, err
	}
	name := o.Prefix()
	if o.ConstantTime {
		// the packed count tiers choose a width per row; constant time
		// keeps every array as its fixed-time walk was measured with
		o.Pack = false
	}
	if err := CheckName(name); err != nil {
		return nil, err
	}
	layout, why, err := Resolve(p, o)
	if err != nil {
		return nil, err
	}
	g := &gen{p: p, o: o, name: name, upper: upperASCII(name), layout: layout, why: why, ft: "double", at: "double",
		f32: p.Float32Accumulate(), comments: emit.NodeComments(o.Comments, p)}
	if o.Float {
		g.ft = "float"
	}
	if o.Float || g.f32 {
		g.at = "float"
	}
	if o.Float && !g.f32 {
		if err := floatBounded(p); err != nil {
			return nil, fmt.Errorf("float C: %w", err)
		}
	}
	g.sets = newSetTable(p)
	g.leaves = make([][][]float64, len(p.Trees))
	for ti := range p.Trees {
		t := &p.Trees[ti]
		g.leaves[ti] = make([][]float64, len(t.Nodes))
		for ni := range t.Nodes {
			n := &t.Nodes[ni]
			if !n.IsLeaf() {
				continue
			}
			v, err := g.narrow(n.Value)
			if err != nil {
				return nil, fmt.Errorf("tree %d, node %d: leaf value %v", t.Source, n.ID, err)
			}
			g.leaves[ti][ni] = v
		}
	}
	if g.base, err = g.narrow(p.BaseScore); err != nil {
		return nil, fmt.Errorf("base score %v", err)
	}
	if o.IntLeaves != 0 {
		if g.il, err = g.newIntLeaves(o.IntLeaves); err != nil {
			return nil, err
		}
	}
	g.featMac = macroNames(g.upper+"_F_", featureNames(p))
	if p.IsClassifier() {
		g.classMac = macroNames(g.upper+"_C_", p.Classes)
	}
	return g, nil
}

// narrow returns v as the target computes with it: unchanged with a double
// accumulator, rounded to the nearest float with a float one (an error when
// that overflows; under float32 accumulation every value is a float already).
func (g *gen) narrow(v []float64) ([]float64, error) {
	if g.at != "float" || g.f32 {
		return v, nil
	}
	out := make([]float64, len(v))
	for i, x := range v {
		f := float64(float32(x))
		if math.IsInf(f, 0) {
			return nil, fmt.Errorf("%v is out of float range\nhint: emit double C", x)
		}
		out[i] = f
	}
	return out, nil
}

func featureNames(p *compile.Program) []string {
	n := make([]string, len(p.Features))
	for i, f := range p.Features {
		n[i] = f.Name
	}
	return n
}

// macroNames makes one macro name per label: prefix followed by the label's
// ASCII letters and digits in upper case, unique.
func macroNames(prefix string, labels []string) []string {
	up := make([]string, len(labels))
	for i, l := range labels {
		up[i] = upperASCII(l)
	}
	ids := emit.Identifiers(up, "N", nil)
	for i := range ids {
		ids[i] = prefix + ids[i]
	}
	return ids
}

func upperASCII(s string) string {
	b := []byte(s)
	for i, c := range b {
		if c >= 'a' && c <= 'z' {
			b[i] = c - 'a' + 'A'
		}
	}
	return string(b)
}

// reservedPrefixes are the beginnings of identifiers C99 7.26 and 7.1.3
// reserve for future library use, as (prefix, class of the next character).
var reservedPrefixes = []struct{ prefix, next string }{
	{"E", "digit or upper"},          // errno.h
	{"is", "lower"}, {"to", "lower"}, // ctype.h
	{"LC_", "upper"},                    // locale.h
	{"SIG", "upper"}, {"SIG_", "upper"}, // signal.h
	{"str", "lower"}, {"mem", "lower"}, {"wcs", "lower"}, // string.h, stdlib.h
	{"PRI", "lower or X"}, {"SCN", "lower or X"}, // inttypes.h
	{"int", ""}, {"uint", ""}, {"INT", ""}, {"UINT", ""}, // stdint.h: intN_t, INTN_MAX...
	{"cerf", ""}, {"cexp", ""}, {"clog", ""}, {"cpow", ""}, {"csin", ""}, {"csqrt", ""}, {"ctan", ""}, {"cabs", ""}, // complex.h
	{"FE_", "upper"},                                           // fenv.h
	{"DECIMAL", ""}, {"FLT_", ""}, {"DBL_", ""}, {"LDBL_", ""}, // float.h
	{"ATOMIC_", "upper"}, {"memory_", "lower"}, {"atomic_", "lower"}, {"cnd_", "lower"}, {"mtx_", "lower"}, {"thrd_", "lower"}, {"tss_", "lower"}, // C11
}

// CheckName reports whether name can prefix the generated files, functions
// and macros: an ASCII identifier starting with a letter, without double
// underscores (reserved in C++, which includes the header), whose lower- and
// upper-case forms start no reserved identifier of the C library.
func CheckName(name string) error {
	bad := func(why string) error {
		return fmt.Errorf("name %q: %s\nhint: use letters, digits and underscores, starting with a letter, e.g. pump_health", name, why)
	}
	if name == "" {
		return bad("empty")
	}
	for i := 0; i < len(name); i++ {
		c := name[i]
		ok := c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c == '_' || i > 0 && c >= '0' && c <= '9'
		if !ok {
			return bad("not a C identifier")
		}
	}
	if name[0] == '_' {
		return bad("identifiers starting with an underscore are reserved in C")
	}
	if strings.Contains(name, "__") {
		return bad("double underscores are reserved in C++")
	}
	// The generated identifiers are name_xxx and NAME_XXX: the character
	// after the name is an underscore. Check both forms.
	for _, id := range []string{name + "_", upperASCII(name) + "_"} {
		for _, r := range reservedPrefixes {
			if !strings.HasPrefix(id, r.prefix) {
				continue
			}
			c := id[len(r.prefix)]
			isUpper, isLower, isDigit := c >= 'A' && c <= 'Z', c >= 'a' && c <= 'z', c >= '0' && c <= '9'
			hit := false
			switch r.next {
			case "":
				hit = true
			case "digit or upper":
				hit = isDigit || isUpper
			case "lower":
				hit = isLower
			case "upper":
				hit = isUpper
			case "lower or X":
				hit = isLower || c == 'X'
			}
			if hit {
				return bad(fmt.Sprintf("%s... is reserved by the C standard library", id[:len(r.prefix)+1]))
			}
		}
	}
	return nil
}

// lit formats a value as a literal of the generated floating type. Values are
// exact: the shortest decimal that reads back as the same double (or float),
// which C compilers round correctly; negative zero keeps its sign.
func (g *gen) lit(v float64) string {
	if g.o.Float {
		return floatLit(v)
	}
	return doubleLit(v)
}

// alit formats a value as a literal of the accumulator's type. Under
// float32 accumulation a base score may have rounded to an infinity, which
// is HUGE_VALF (math.h).
func (g *gen) alit(v float64) string {
	if g.at == "float" && math.IsInf(v, 0) {
		return floatConst(v)
	}
	if g.at == "float" {
		return floatLit(v)
	}
	return doubleLit(v)
}

// doubleConst is doubleLit, or HUGE_VAL (math.h) for an infinity.
func doubleConst(v float64) string {
	switch {
	case math.IsInf(v, 1):
		return "HUGE_VAL"
	case math.IsInf(v, -1):
		return "(-HUGE_VAL)"
	}
	return doubleLit(v)
}

func doubleLit(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		panic(fmt.Sprintf("BUG: ctarget: %v has no C literal", v))
	}
	s := strconv.FormatFloat(v, 'g', -1, 64)
	if !strings.ContainsAny(s, ".e") {
		s += ".0"
	}
	return s
}

func floatLit(v float64) string {
	f := float32(v)
	if float64(f) != v || math.IsNaN(v) || math.IsInf(v, 0) {
		panic(fmt.Sprintf("BUG: ctarget: %v is not a finite float value", v))
	}
	s := strconv.FormatFloat(v, 'g', -1, 32)
	if !strings.ContainsAny(s, ".e") {
		s += ".0"
	}
	return s + "f"
}

// comment makes s safe inside a C block comment, byte by byte: printable
// ASCII stays, a backslash is doubled, every other byte (controls, newlines,
// each byte of a non-ASCII character) becomes an octal escape \ooo, and a
// space breaks up "*/", "/*" and "??" (which could start a trigraph such as
// ??/, a backslash). The result is pure ASCII.
func comment(s string) string {
	var b strings.Builder
	var prev byte
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '\\':
			b.WriteString(`\\`)
			prev = '\\'
			continue
		case c < 0x20 || c > 0x7e:
			fmt.Fprintf(&b, `\%03o`, c)
			prev = '0'
			continue
		case c == '/' && prev == '*', c == '*' && prev == '/', c == '?' && prev == '?':
			b.WriteByte(' ')
		}
		b.WriteByte(c)
		prev = c
	}
	return b.String()
}

// cString makes s a C string literal with the same bytes: printable ASCII
// stays except that ", \ and ? are escaped (\? keeps trigraphs from forming),
// and every other byte is an octal escape of three digits (so a following
// digit is never absorbed).
func cString(s string) string {
	var b strings.Builder
	b.WriteByte('"')
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '"' || c == '\\' || c == '?':
			b.WriteByte('\\')
			b.WriteByte(c)
		case c < 0x20 || c > 0x7e:
			fmt.Fprintf(&b, `\%03o`, c)
		default:
			b.WriteByte(c)
		}
	}
	b.WriteByte('"')
	return b.String()
}

// printer accumulates indented lines of C.
type printer struct {
	buf    bytes.Buffer
	indent int
}

func (w *printer) line(format string, args ...any) {
	if format == "" {
		w.buf.WriteByte('\n')
		return
	}
	for i := 0; i < w.indent; i++ {
		w.buf.WriteByte('\t')
	}
	if len(args) == 0 {
		w.buf.WriteString(format)
	} else {
		fmt.Fprintf(&w.buf, format, args...)
	}
	w.buf.WriteByte('\n')
}

func (w *printer) in()  { w.indent++ }
func (w *printer) out() { w.indent-- }

func (w *printer) bytes() []byte { return w.buf.Bytes() }

// header returns NAME.h.
func (g *gen) header() []byte {
	p := g.p
	var w printer
	u, ft := g.upper, g.ft
	w.line("/* Code generated by sawmill %s. DO NOT EDIT.", comment(emit.HeaderVersion(g.o.Version)))
	w.line(" * %s", emit.Ownership)
	w.line(" *")
	w.line(" * Model: SHA-256 %s", comment(p.Hash))
	w.line(" * %s with %d trees, %d nodes (%d leaves), depth %d; layout %s (%s).",
		p.Task, len(p.Trees), p.NumNodes(), p.NumLeaves(), p.MaxDepth(), g.layout, comment(g.why))
	w.line(" *")
	for _, l := range g.docLines() {
		if l == "" {
			w.line(" *")
		} else {
			w.line(" * %s", l)
		}
	}
	w.line(" *")
	w.line(" * Inputs x[0..%d] (%s_NUM_FEATURES), in this order; a missing value is NaN:", len(p.Features)-1, u)
	for i, f := range p.Features {
		unused := ""
		if !f.Used {
			unused = " (not tested by any split)"
		}
		w.line(" *   x[%d] %s%s", i, comment(f.Name), unused)
	}
	w.line(" * Outputs out[0..%d] (%s_NUM_OUTPUTS):", p.NumOutputs-1, u)
	for j := 0; j < p.NumOutputs; j++ {
		w.line(" *   out[%d] %s", j, comment(g.outputName(j)))
	}
	if p.IsClassifier() {
		w.line(" * Classes, as %s_predict_class numbers them:", g.name)
		for i, c := range p.Classes {
			w.line(" *   %d %s", i, comment(c))
		}
	}
	w.line(" *")
	total := 0
	w.line(" * Static tables in %s.c:", g.name)
	for _, t := range g.tables {
		w.line(" *   %s: %s, %d x %d = %d bytes", t.Name, comment(t.What), t.Len, t.ElemBytes, t.Bytes())
		total += t.Bytes()
	}
	w.line(" *   total %d bytes (%.2f bytes per node; code not counted)", total, float64(total)/float64(p.NumNodes()))
	g.timeFacts(&w)
	w.line(" *")
	switch {
	case g.il != nil:
		w.line(" * Arithmetic: comparisons are exact, the leaves are not (LOSSY, below); the")
		w.line(" * sums are turned into %s and finished in %s.", g.at, g.at)
	case g.f32:
		w.line(" * Arithmetic: the model accumulates in float32, and so does this code: every")
		w.line(" * addition, the division of an average, the scale and the transform are")
		w.line(" * float (IEEE 754 binary32) operations, one per statement, in the")
		w.line(" * interpreter's order; comparisons are exact. The transform calls the C")
		w.line(" * library's expf; the interpreter ports glibc's, so with glibc the outputs")
		w.line(" * are bit-identical to sawmill's interpreter. With another C library whose")
		w.line(" * expf is within 1 ulp of e^x, a transformed output is within 4 ulp (a")
		w.line(" * relative 2^-21) of the interpreter's. The code needs FLT_EVAL_METHOD 0")
		w.line(" * (x86-64 SSE, AArch64, ARM VFP) and stops with #error elsewhere: with x87")
		w.line(" * excess precision build with -msse2 -mfpmath=sse.")
	case g.o.Float:
		w.line(" * Arithmetic: float (IEEE 754 binary32). Comparisons are exact for every")
		w.line(" * float input: each threshold is the float the model's comparison reduces")
		w.line(" * to. Leaves are rounded to float and summed in float, so outputs differ")
		w.line(" * from the double model by a rounding error bounded by the number of trees")
		w.line(" * times the largest leaf times about 2^-23; for this model every output is")
		w.line(" * within %s of the interpreter's on the same float inputs.", strconv.FormatFloat(ErrorBound(p, true), 'g', 3, 64))
	default:
		w.line(" * Arithmetic: double (IEEE 754 binary64). Outputs are bit-identical to")
		w.line(" * sawmill's interpreter where FLT_EVAL_METHOD is 0 (x86-64 SSE, AArch64,")
		if b := ErrorBound(p, false); b != 0 {
			w.line(" * ARM VFP): the same comparisons and additions in the same order; the")
			w.line(" * transform uses the C library's exp, which may differ from the")
			w.line(" * interpreter's in the last bit (every output within %s of it).", strconv.FormatFloat(b, 'g', 3, 64))
		} else {
			w.line(" * ARM VFP): the same comparisons and operations in the same order.")
		}
		w.line(" * With x87 excess precision (FLT_EVAL_METHOD 2) sums may differ in the")
		w.line(" * last bit; comparisons stay exact.")
	}
	if g.il != nil {
		g.intLeavesDoc(&w)
	}
	w.line(" * Build without -ffast-math, -ffinite-math-only, -funsafe-math-optimizations")
	w.line(" * or flush-to-zero: missing values are NaN and signed zeros and subnormals")
	w.line(" * must be kept.")
	g.fpHeaderDoc(&w)
	w.line(" */")
	w.line("#ifndef %s_H", u)
	w.line("#define %s_H", u)
	w.line("")
	w.line("#include <stddef.h>")
	w.line("")
	w.line("#ifdef __cplusplus")
	w.line(`extern "C" {`)
	w.line("#endif")
	w.line("")
	w.line("#define %s_NUM_FEATURES %d", u, len(p.Features))
	w.line("#define %s_NUM_OUTPUTS %d", u, p.NumOutputs)
	if p.IsClassifier() {
		w.line("#define %s_NUM_CLASSES %d", u, len(p.Classes))
	}
	w.line("")
	w.line("/* Index of each feature in x. */")
	for i, m := range g.featMac {
		w.line("#define %s %d", m, i)
	}
	if p.IsClassifier() {
		w.line("")
		w.line("/* Number of each class. */")
		for i, m := range g.classMac {
			w.line("#define %s %d", m, i)
		}
	}
	w.line("")
	w.line("/* Scores x (%s_NUM_FEATURES values) into out (%s_NUM_OUTPUTS values). */", u, u)
	w.line("void %s_predict(const %s *x, %s *out);", g.name, ft, ft)
	w.line("")
	w.line("/* Scores n rows, x row after row (n * %s_NUM_FEATURES values), into out", u)
	w.line(" * (n * %s_NUM_OUTPUTS values): each row exactly as %s_predict scores it.", u, g.name)
	switch g.layout {
	case emit.Table:
		w.line(" * Tree by tree over all rows, so each tree's words stay in cache. */")
	case Block:
		w.line(" * Blocks of rows (%s_BK_ROWS in %s.c) walk each tree, eight rows", u, g.name)
		w.line(" * interleaved, without branches on the data. */")
	case Perfect:
		w.line(" * Blocks of rows (%s_PF_ROWS in %s.c) walk each tree, padded to a perfect", u, g.name)
		if g.pf.ord {
			w.line(" * tree, in a fixed number of steps without branches on the data. Built by")
			w.line(" * gcc or clang for x86-64, a step is four instructions of inline assembly;")
			w.line(" * define %s_NO_ASM to build it from C alone, with the same bits. */", u)
		} else {
			w.line(" * tree, in a fixed number of steps without branches on the data. */")
		}
	default:
		w.line(" * Row by row. */")
	}
	w.line("void %s_predict_batch(const %s *x, size_t n, %s *out);", g.name, ft, ft)
	if p.IsClassifier() {
		w.line("")
		if p.NumOutputs == 1 {
			w.line("/* The predicted class of x: 1 when the output is above 0.5, else 0. */")
		} else {
			w.line("/* The predicted class of x: the index of the largest output, ties to the lowest. */")
		}
		w.line("int %s_predict_class(const %s *x);", g.name, ft)
	}
	g.fpHeaderDecl(&w)
	if g.il != nil {
		g.intLeavesDecl(&w)
	}
	w.line("")
	w.line("/* The model's feature names, in input order (UTF-8). */")
	w.line("extern const char *const %s_feature_names[%s_NUM_FEATURES];", g.name, u)
	if p.IsClassifier() {
		w.line("/* The model's class labels, in class order (UTF-8). */")
		w.line("extern const char *const %s_class_names[%s_NUM_CLASSES];", g.name, u)
	}
	w.line("")
	w.line("#ifdef __cplusplus")
	w.line("}")
	w.line("#endif")
	w.line("")
	w.line("#endif /* %s_H */", u)
	return w.bytes()
}

// outputName describes output j.
func (g *gen) outputName(j int) string {
	p := g.p
	switch {
	case p.IsClassifier() && p.NumOutputs == 1:
		return "probability of class " + p.Classes[1]
	case p.IsClassifier():
		return p.Classes[j]
	}
	return "prediction"
}

// docLines says what predict computes.
func (g *gen) docLines() []string {
	p := g.p
	var l []string
	T := len(p.Trees)
	each := "leaf_t(x), the value vector of the leaf x reaches in tree t"
	terms := fmt.Sprintf("leaf_0(x) + ... + leaf_%d(x)", T-1)
	if T == 1 {
		terms = "leaf_0(x)"
	}
	perOutput := false
	for ti := range p.Trees {
		perOutput = perOutput || g.scalarTree(ti)
	}
	arith := ""
	if g.f32 {
		arith = " in float"
	}
	switch p.Combine {
	case forest.Sum:
		l = append(l, fmt.Sprintf("%s_predict: z = base + %s, added%s in that order,", g.name, terms, arith),
			"with "+each+";")
	case forest.Average:
		div := fmt.Sprint(T)
		if perOutput {
			div = "T_j"
		}
		l = append(l, fmt.Sprintf("%s_predict: z = (0 + %s) / %s + base, added%s in that", g.name, terms, div, arith),
			"order, with "+each+";")
	}
	if perOutput {
		l = append(l, "a tree of one output (so marked below) adds its one value to that output",
			"only; T_j is the number of trees adding to output j;")
	}
	var bs []string
	for _, b := range g.base {
		bs = append(bs, g.alit(b))
	}
	l = append(l, "base = {"+strings.Join(bs, ", ")+"}.")
	if s := p.Scale(); s != 1 {
		sl := floatConst(s) // round32(s) under float32 accumulation
		if !g.f32 {
			sl = doubleLit(s)
		}
		l = append(l, fmt.Sprintf("Then z = %s * z, one multiplication.", sl))
	}
	exp := "exp"
	if g.at == "float" {
		exp = "expf"
	}
	switch p.Transform {
	case forest.Logistic, forest.LogisticEach:
		if g.f32 {
			l = append(l, "Then out_j = 1/(1+expf(-z_j)), each operation in float.")
		} else {
			l = append(l, fmt.Sprintf("Then out_j = 1/(1+%s(-z_j)) for z_j >= 0, %s(z_j)/(1+%s(z_j)) for z_j < 0.", exp, exp, exp))
		}
	case forest.Softmax:
		sum := "(in order)"
		if g.f32 {
			sum = "(in double, in order, then rounded to float)"
		}
		l = append(l, fmt.Sprintf("Then out = softmax(z): m = max z, e_j = %s(z_j - m), s = e_0 + ... %s,", exp, sum), "out_j = e_j / s.")
	case forest.Exp:
		l = append(l, fmt.Sprintf("Then out_j = %s(z_j).", exp))
	case forest.Normalize:
		l = append(l, "Then out_j = z_j / s with s = z_0 + z_1 + ... in order; all zeros when s is 0.")
	default:
		l = append(l, "out = z.")
	}
	l = append(l, "A split sends x left when x[f] <= t (some splits, from float32 models, use <);",
		"a missing (NaN) input goes the way the model says for that split.")
	if len(g.sets.sets) > 0 {
		rule := map[forest.CategoryMatch]string{
			forest.MatchTruncate: "its integer part toward zero, for -1 < x[f] < 2^31",
			forest.MatchExact:    "x[f] itself when an integer in [0, 2^31)",
		}[p.CategoryMatch]
		if rule == "" {
			rule = "its integer part, for 0 <= x[f] < 2^31"
		}
		l = append(l, "A set split sends x left when the category of x[f] ("+rule+")",
			"is one of the split's list; other values go right.")
		if p.CategoryRound32 {
			l = append(l, "Set splits take the category of x[f] rounded to float.")
		}
	}
	if p.HasMissingValue {
		l = append(l, fmt.Sprintf("An input in [%s, %s] also counts as missing.", g.boundLit(p.MissingLo), g.boundLit(p.MissingHi)))
	}
	if hasZeroMissing(p) {
		l = append(l, fmt.Sprintf("At splits so marked, an input in [%s, %s] also counts as missing.", g.boundLit(-p.ZeroBound), g.boundLit(p.ZeroBound)))
	}
	return l
}

// source returns NAME.c around the layout's body.
func (g *gen) source(body []byte) []byte {
	p := g.p
	var w printer
	w.line("/* Code generated by sawmill %s. DO NOT EDIT.", comment(emit.HeaderVersion(g.o.Version)))
	w.line(" * %s", emit.Ownership)
	w.line(" * Model: SHA-256 %s; layout %s, %s arithmetic. See %s.h. */", comment(p.Hash), g.layout, g.ft, g.name)
	w.line("")
	w.line(`#include "%s.h"`, g.name)
	w.line("")
	w.line("#include <float.h>")
	if p.Transform != forest.NoTransform || bytes.Contains(body, []byte("HUGE_VAL")) {
		w.line("#include <math.h>")
	}
	if g.layout == emit.Table || g.layout == emit.Binned || g.layout == Bitvector || g.layout == Block || g.layout == Perfect || len(g.sets.sets) > 0 {
		w.line("#include <stdint.h>")
	}
	if g.layout == emit.Binned {
		w.line("#include <string.h>")
	}
	g.fpSourceChecks(&w)
	w.line("")
	w.line("/* No contraction of a*b+c into a fused multiply-add (C99 7.12.2). gcc")
	w.line(" * ignores the pragma and contracts in its GNU modes; the code keeps a")
	w.line(" * multiplication away from any addition. */")
	w.line("#if !defined(__GNUC__) || defined(__clang__)")
	w.line("#pragma STDC FP_CONTRACT OFF")
	w.line("#endif")
	w.line("")
	w.line("const char *const %s_feature_names[%s_NUM_FEATURES] = {", g.name, g.upper)
	for i, f := range p.Features {
		w.line("\t%s%s", cString(f.Name), comma(i, len(p.Features)))
	}
	w.line("};")
	if p.IsClassifier() {
		w.line("")
		w.line("const char *const %s_class_names[%s_NUM_CLASSES] = {", g.name, g.upper)
		for i, c := range p.Classes {
			w.line("\t%s%s", cString(c), comma(i, len(p.Classes)))
		}
		w.line("};")
	}
	w.line("")
	w.buf.Write(body)
	g.fpCheckFunc(&w)
	return w.bytes()
}

func comma(i, n int) string {
	if i < n-1 {
		return ","
	}
	return ""
}

// finish writes the transform, the copy to out and predict_class: the end of
// predict, whose accumulator acc (K values) holds z, and what follows it.
func (g *gen) finish(w *printer) {
	p := g.p
	k := p.NumOutputs
	ft := g.ft
	g.finishBody(w)
	w.out()
	w.line("}")
	if !p.IsClassifier() {
		return
	}
	w.line("")
	w.line("int %s_predict_class(const %s *x)", g.name, ft)
	w.line("{")
	w.in()
	w.line("%s out[%s_NUM_OUTPUTS];", ft, g.upper)
	if k == 1 {
		w.line("%s_predict(x, out);", g.name)
		w.line("return out[0] > %s ? 1 : 0;", g.lit(0.5))
	} else {
		g.argmaxLines(w, "out", "_predict")
	}
	w.out()
	w.line("}")
}

// argmaxLines writes the body that calls NAME+fn(x, arr) and returns the
// first index of arr's largest element.
func (g *gen) argmaxLines(w *printer, arr, fn string) {
	w.line("int j, best = 0;")
	w.line("%s%s(x, %s);", g.name, fn, arr)
	w.line("for (j = 1; j < %s_NUM_OUTPUTS; j++) {", g.upper)
	w.line("\tif (%s[j] > %s[best]) {", arr, arr)
	w.line("\t\tbest = j;")
	w.line("\t}")
	w.line("}")
	w.line("return best;")
}

// writeBatch writes NAME_predict_batch: the table layout's own (g.batch),
// else a loop over NAME_predict.
func (g *gen) writeBatch(w *printer) {
	w.line("")
	if g.batch != nil {
		g.batch(w)
		return
	}
	w.line("void %s_predict_batch(const %s *x, size_t n, %s *out)", g.name, g.ft, g.ft)
	w.line("{")
	w.line("\tsize_t r;")
	w.line("\tfor (r = 0; r < n; r++) {")
	w.line("\t\t%s_predict(x + r * %s_NUM_FEATURES, out + r * %s_NUM_OUTPUTS);", g.name, g.upper, g.upper)
	w.line("\t}")
	w.line("}")
}

// finishBody writes, from the sums in acc, the average, the scale, the
// transform and the copy to out, in the order and the arithmetic the
// interpreter uses (forest.Forest.PredictRaw and Finish). Under float32
// accumulation each float operation is a statement of its own, so that no
// wider intermediate and no contraction into a fused multiply-add can
// change a bit; the one multiplication, by the scale, is stored through a
// volatile so that gcc's -ffp-contract=fast (its default outside the ISO
// modes) cannot fuse it with the subtraction or addition that follows.
func (g *gen) finishBody(w *printer) {
	p := g.p
	k := p.NumOutputs
	at := g.at
	if p.Combine == forest.Average {
		for j := 0; j < k; j++ {
			n := g.alit(float64(p.TreesAddingTo(j)))
			if g.f32 {
				w.line("acc[%d] = acc[%d] / %s;", j, j, n)
				w.line("acc[%d] = acc[%d] + %s;", j, j, g.alit(g.base[j]))
			} else {
				w.line("acc[%d] = acc[%d] / %s + %s;", j, j, n, g.alit(g.base[j]))
			}
		}
	}
	if s := p.Scale(); s != 1 {
		var sl string
		if g.f32 {
			sl = floatConst(s) // round32(s)
		} else {
			sl = g.alit(s)
		}
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("	volatile %s z = %s * acc[j]; /* z = s * acc, rounded once; never fused */", at, sl)
		w.line("	acc[j] = z;")
		w.line("}")
	}
	exp := "exp"
	if at == "float" {
		exp = "expf"
	}
	one, zero := g.alit(1), g.alit(0)
	switch p.Transform {
	case forest.Logistic, forest.LogisticEach:
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.in()
		if g.f32 {
			w.line("const float d = %s + expf(-acc[j]);", one)
			w.line("acc[j] = %s / d;", one)
		} else if g.o.ConstantTime {
			g.ctLogistic(w, exp, one)
		} else {
			w.line("if (acc[j] >= %s) {", zero)
			w.line("	acc[j] = %s / (%s + %s(-acc[j]));", one, one, exp)
			w.line("} else {")
			w.line("	const %s e = %s(acc[j]);", at, exp)
			w.line("	acc[j] = e / (%s + e);", one)
			w.line("}")
		}
		w.out()
		w.line("}")
	case forest.Exp:
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("	acc[j] = %s(acc[j]);", exp)
		w.line("}")
	case forest.Softmax:
		w.line("{")
		w.in()
		st := at
		if g.f32 {
			st = "double" // the exponentials are summed in double
		}
		w.line("%s m = acc[0];", at)
		w.line("%s s = %s;", st, map[string]string{"double": "0.0", "float": "0.0f"}[st])
		w.line("for (j = 1; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("	if (acc[j] > m) {")
		w.line("		m = acc[j];")
		w.line("	}")
		w.line("}")
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		if g.f32 {
			w.line("	acc[j] = expf(acc[j] - m);")
			w.line("	s += (double)acc[j];")
		} else {
			w.line("	acc[j] = %s(acc[j] - m);", exp)
			w.line("	s += acc[j];")
		}
		w.line("}")
		if g.f32 {
			w.line("m = (float)s; /* the sum, rounded to float once */")
			w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
			w.line("	acc[j] = acc[j] / m;")
		} else {
			w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
			w.line("	acc[j] = acc[j] / s;")
		}
		w.line("}")
		w.out()
		w.line("}")
	case forest.Normalize:
		w.line("{")
		w.in()
		w.line("%s s = %s;", at, zero)
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("	s = s + acc[j];")
		w.line("}")
		w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
		w.line("	acc[j] = s == %s ? %s : acc[j] / s; /* a zero sum gives zeros */", zero, zero)
		w.line("}")
		w.out()
		w.line("}")
	}
	w.line("for (j = 0; j < %s_NUM_OUTPUTS; j++) {", g.upper)
	if at != g.ft {
		w.line("	out[j] = (%s)acc[j];", g.ft)
	} else {
		w.line("	out[j] = acc[j];")
	}
	w.line("}")
}

// floatConst is a float constant for round32(v): its literal, or for a
// value float cannot hold, the infinity or zero it rounds to.
func floatConst(v float64) string {
	f := float32(v)
	switch {
	case math.IsInf(float64(f), 1):
		return "HUGE_VALF"
	case math.IsInf(float64(f), -1):
		return "(-HUGE_VALF)"
	}
	return floatLit(float64(f))
}

// predictStart opens predict and sets the accumulator acc to its start:
// the base score for a sum, zero for an average.
func (g *gen) predictStart(w *printer, locals ...string) {
	p := g.p
	if g.il != nil {
		g.scaledStart(w, locals)
		return
	}
	w.line("void %s_predict(const %s *x, %s *out)", g.name, g.ft, g.ft)
	w.line("{")
	w.in()
	w.line("%s acc[%s_NUM_OUTPUTS];", g.at, g.upper)
	w.line("int j;")
	for _, l := range locals {
		w.line("%s", l)
	}
	for j := 0; j < p.NumOutputs; j++ {
		w.line("acc[%d] = %s;", j, g.accStart(j))
	}
}

// accStart is output j's sum before the first tree: the base score for a
// sum, zero for an average (which adds the base after dividing).
func (g *gen) accStart(j int) string {
	return g.alit(g.accValue(j))
}

// accValue is accStart's value.
func (g *gen) accValue(j int) float64 {
	if g.p.Combine == forest.Sum {
		return g.base[j]
	}
	return 0
}
