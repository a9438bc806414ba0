// Package train grows random forests: Breiman's algorithm (L. Breiman,
// "Random Forests", Machine Learning 45:5-32, 2001) as sawmill's design
// states it, producing a validated *forest.Forest.
//
// Each tree is grown on a bootstrap sample: round(SampleFraction·n) rows
// drawn uniformly with replacement from the n training rows. Trees are fully
// grown unless MaxDepth or MinLeaf stop them: a node becomes a leaf when it
// is pure (one class, or one target value), when it holds fewer than
// 2·MinLeaf bootstrap draws, at depth MaxDepth, or when no split leaves
// MinLeaf draws on each side. MinLeaf counts bootstrap draws, so a row drawn
// twice counts twice, as it does in every impurity sum.
//
// At every node mtry features are drawn afresh, without replacement. A
// feature that is constant within the node tells nothing and is not counted:
// drawing goes on until mtry non-constant features have been examined or none
// is left (so a node with any non-constant feature is split). Splits minimise
// the weighted Gini impurity of the children (classification) or the
// weighted sum of squared deviations (regression, "variance reduction").
// Candidate thresholds are midpoints between neighbouring distinct values of
// the feature in the node; when the midpoint rounds up to the upper value,
// the lower value is used, so that "x <= threshold" always separates. Among
// equal scores the first feature drawn and then the lowest threshold wins.
//
// Classifier leaves hold class probabilities: the share of the leaf's
// bootstrap draws in each class. The forest averages them (combine
// "average"). Regression leaves hold the mean target of their draws.
// Classes are the distinct labels in sorted order: by numeric value when
// every label is a number, otherwise by byte-wise string order.
//
// Splits are searched on pre-sorted orders: every worker keeps, for the tree
// it grows, one list of the in-bag rows per feature, sorted by that feature,
// and partitions all of them at each split. That costs 4·p·n bytes per
// worker and p·m steps per node of m rows, which is the fastest way for
// tables of up to some hundreds of features.
//
// Randomness: tree i draws from its own generator seeded from (Seed, i)
// alone, so the forest is the same, byte for byte, whatever the number of
// threads. Out-of-bag results are accumulated in tree order for the same
// reason.
//
// Out-of-bag estimates (Breiman 2001, section 3.1): every row is scored by
// the trees whose bootstrap sample did not draw it, their leaf vectors
// averaged. The OOB error is the misclassification rate over the rows that
// have at least one such tree (classification), or their mean squared error
// with the matching R² (regression); the curve gives the same figure after
// the first t trees. Permutation importance is computed per tree, as in
// Breiman's original program: for tree t and feature j, the values of j are
// permuted among tree t's out-of-bag rows, and the increase in that tree's
// own out-of-bag error (its leaf argmax for classification, its leaf mean's
// squared error for regression) is recorded; a feature's importance is the
// mean increase over all trees.
package train
