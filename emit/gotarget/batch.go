package gotarget

import (
	"go/format"
	"strings"

	"github.com/sawmill-dev/sawmill/emit"
)

// BatchFile holds PredictBatch and PredictBatchWorkers in the emitted
// package.
const BatchFile = "batch.go"

// batchSource returns batch.go: PredictBatch, which scores rows one after
// another through Predict (in the format 1 table layout, blocks of rows
// through predictRows), and PredictBatchWorkers, the same over goroutines,
// each scoring a contiguous part of the rows. Every output is Predict's, bit
// for bit, whatever the worker count.
func (g *gen) batchSource() ([]byte, error) {
	score := batchThroughPredict
	if g.layout == emit.Table && !g.v2 {
		score = batchThroughBlocks
	}
	src := strings.NewReplacer("GENERATED", g.generatedLine(), "OWNERSHIP", emit.Ownership,
		"PACKAGE", g.pkg, "BATCHSCORE", score).Replace(batchTemplate)
	out, err := format.Source([]byte(src))
	if err != nil {
		return nil, err
	}
	return out, nil
}

const batchTemplate = `// GENERATED
// OWNERSHIP

package PACKAGE

import (
	"fmt"
	"sync"
)

// BatchMinRows is the fewest rows PredictBatchWorkers gives one goroutine:
// fewer would not repay starting it.
const BatchMinRows = 64

// PredictBatch scores rows into out: row r's outputs go to
// out[r*NumOutputs : (r+1)*NumOutputs], each exactly as Predict scores the
// row. Every row must hold NumFeatures values (NaN where one is missing) and
// out at least len(rows)*NumOutputs; otherwise PredictBatch writes nothing
// and returns an error naming the first row (or out) that does not fit.
func PredictBatch(rows [][]float64, out []float64) error {
	return PredictBatchWorkers(rows, out, 1)
}

// PredictBatchWorkers is PredictBatch on up to workers goroutines (the
// caller's among them), each scoring a contiguous part of at least
// BatchMinRows rows. The outputs do not depend on workers.
func PredictBatchWorkers(rows [][]float64, out []float64, workers int) error {
	if err := batchCheck(rows, out); err != nil {
		return err
	}
	parts := len(rows) / BatchMinRows
	if workers < parts {
		parts = workers
	}
	if parts <= 1 {
		batchScore(rows, out)
		return nil
	}
	var wg sync.WaitGroup
	from := 0
	for k := 0; k < parts; k++ {
		n := len(rows) / parts
		if k < len(rows)%parts {
			n++
		}
		rs, part := rows[from:from+n], out[from*NumOutputs:(from+n)*NumOutputs]
		from += n
		if k == parts-1 {
			batchScore(rs, part)
			break
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			batchScore(rs, part)
		}()
	}
	wg.Wait()
	return nil
}

// batchCheck says which row, if any, does not hold NumFeatures values, or
// that out is too short.
func batchCheck(rows [][]float64, out []float64) error {
	for r, x := range rows {
		if len(x) != NumFeatures {
			return fmt.Errorf("row %d: %d values, the model has %d features", r, len(x), NumFeatures)
		}
	}
	if len(out) < len(rows)*NumOutputs {
		return fmt.Errorf("out: %d values, %d rows need %d", len(out), len(rows), len(rows)*NumOutputs)
	}
	return nil
}

BATCHSCORE`

// batchThroughPredict is batchScore in every layout but the format 1 table.
const batchThroughPredict = `// batchScore scores rows into out through Predict.
func batchScore(rows [][]float64, out []float64) {
	for r, x := range rows {
		y := Predict((*[NumFeatures]float64)(x))
		copy(out[r*NumOutputs:], y[:])
	}
}
`

// batchThroughBlocks is batchScore in the format 1 table layout, whose
// predictRows (rows.go) walks blocks of rows tree group by tree group.
const batchThroughBlocks = `// batchScore scores rows into out through predictRows, which walks blocks of
// rows and scores each exactly as Predict does.
func batchScore(rows [][]float64, out []float64) {
	predictRows(rows, out)
}
`
