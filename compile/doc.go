// Package compile is sawmill's middle: it lowers a forest.Forest to an
// intermediate if/else form, the Program, and makes it smaller with passes
// before any emitter sees it.
//
// # The IR
//
// A Program is the forest as explicit nodes: each tree a flat slice in
// preorder (node 0 the root, children after their parent), each node a split
// (feature, Op, threshold, where a missing value goes, two child indices) or
// a leaf (a value vector of NumOutputs entries). Beside the trees it carries
// what emitters need: the features and which ones are used, the classes, the
// combine rule, base score, output transform, the comparison form (Compare),
// and the model's content hash. Check states and verifies every invariant;
// the pass driver runs it after each pass.
//
// Format version 2 is carried as it is read, so that a target can test it
// cheaply on the inputs it gets. A split first asks whether its input is
// missing: NaN, inside the program's missing band [MissingLo, MissingHi]
// (the model's missing_value), or, at a node with ZeroMissing, inside
// [−ZeroBound, ZeroBound]; both bands are closed intervals of what the
// split sees under Compare, so a target tests two comparisons and never
// rounds. A set split (Node.Categories) then tests membership under
// CategoryMatch: MemberRange gives bounds outside which nothing is a
// member and inside which the category is the input truncated, so a
// target tests a range and looks one integer up. Trees of one output
// (Tree.HasOutput) add to that output alone and count only towards its
// average (TreesAddingTo). Accumulate, TransformScale and the transform say
// how the joined score is computed; Eval does it with the interpreter's
// own operations (forest.Finish).
//
// # Exactness
//
// A pass is exact when, for every possible input row (missing values, ±0,
// infinities and subnormals included), the program's outputs are
// bit-identical to the interpreter's (forest.Predict). Exact passes run by
// default. A lossy pass changes some output by some amount; it runs only
// when asked for by name, and verify then reports the measured error. Eval
// scores a Program as a target would, so tests hold every pass against the
// interpreter on random forests and adversarial rows.
//
// # Passes
//
// One ordered table, Passes, lists them with their exactness; Order lists
// the constraints between them, checked by a test. Analysis passes only mark
// splits as decided; one shared sweep removes what became unreachable.
//
//	vote      vote leaves become one-hot vectors of their winning class,
//	          combined by average: the same counts, divided the same way
//	prune     interval and missing-value facts along each path decide splits
//	          (set splits and numbers that count as missing over-approximated:
//	          a split is left undecided whenever the facts cannot settle it)
//	fold      a split whose two subtrees are identical becomes one of them
//	leaves32  (lossy) leaf values rounded to float32
//	float32   float32-model comparisons rewritten so that no target needs
//	          float32 arithmetic (Midpoint32, and Round32Range for the
//	          missing band and the zero bound), or, for float32 targets,
//	          with float32 thresholds (Single32); set splits of a float32
//	          model keep their lists and, for float64 inputs, are marked
//	          CategoryRound32; Midpoints32 records that every numeric
//	          split is the midpoint test of a finite float32, which a
//	          target may store as that float32
//	used      features no split tests are marked unused
//
// The text form (Format, Parse) has one line per node, so pass tests are
// tables of before and after programs and `--dump-after PASS` prints it.
package compile
