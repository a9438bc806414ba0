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
//	fold      a split whose two subtrees are identical becomes one of them
//	leaves32  (lossy) leaf values rounded to float32
//	float32   float32-model comparisons rewritten so that no target needs
//	          float32 arithmetic (Midpoint32), or, for float32 targets, with
//	          float32 thresholds (Single32)
//	used      features no split tests are marked unused
//
// The text form (Format, Parse) has one line per node, so pass tests are
// tables of before and after programs and `--dump-after PASS` prints it.
package compile
