package verify

import (
	"context"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
)

// BatchScorer is implemented by runners that can score many programs with
// one build: a toolchain run costs far more than scoring one small model,
// so the differential test hands such a runner a batch of models at once.
type BatchScorer interface {
	Runner
	// ScoreBatch emits every job into dir, builds them together, scores
	// each job's rows and returns one BatchResult per job, in order. A
	// failure of one job alone (emit, decline, run) is in its BatchResult;
	// an error for the whole batch (a build failed) leaves it to the caller
	// to score the jobs one at a time with Score to find the culprit.
	ScoreBatch(ctx context.Context, jobs []Job, dir string) ([]BatchResult, error)
}

// Job is one program for BatchScorer, with what Score would take.
type Job struct {
	Program         *compile.Program
	Layout, Variant string
	Rows            *forest.Rows
	// Light skips the runner's costlier source checks (Go: gofmt and vet;
	// C: each emitted file compiled alone as well as in the batch's).
	Light bool
}

// BatchResult is what one job of a batch gave: a Result, or its error.
type BatchResult struct {
	Result *Result
	Err    error
}
