package verify

import (
	"context"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit/sqltarget"
	"github.com/sawmill-dev/sawmill/forest"
)

// sparkFunctionName is the function the spark runner's function variant
// creates (with FunctionNames' suffixes): permanent functions of the
// session's in-memory catalog, replaced by each run (CREATE OR REPLACE),
// as the emitted text writes them.
const sparkFunctionName = "sawmill_score"

// scoreSparkFunction runs p through the function form in Spark: the driver
// loads the rows as Score does, runs the emitted CREATE FUNCTION
// statements, then scores every row through SELECT row, NAME_0(...), ...
// FROM the table (functionQuery).
func (r sparkRunner) scoreSparkFunction(ctx context.Context, p *compile.Program, layout string, rows *forest.Rows, dir string) (*Result, error) {
	if p.NumOutputs > sqltarget.MaxFunctionOutputs {
		return nil, fmt.Errorf("%w: the function form takes at most %d outputs, and the model has %d", ErrDeclined, sqltarget.MaxFunctionOutputs, p.NumOutputs)
	}
	o, err := r.options(p, layout, "", "")
	if err != nil {
		return nil, err
	}
	fo := o
	fo.Keep = nil
	fo.Function = sparkFunctionName
	stmts, err := sqltarget.FunctionStatements(p, fo)
	if errors.Is(err, sqltarget.ErrFunctionSize) {
		return nil, fmt.Errorf("%w: %v", ErrDeclined, err) // the emitter's refusal, tested there
	}
	if err != nil {
		return nil, declined(err)
	}
	if dir != "" {
		files, err := sqltarget.Emit(p, fo)
		if err != nil {
			return nil, err
		}
		if err := os.WriteFile(filepath.Join(dir, files[0].Name), files[0].Data, 0o644); err != nil {
			return nil, err
		}
	}
	req, twins := sparkRows(p, o, rows)
	req.Setup = stmts
	req.SQL = r.functionQuery(p, o, fo, sqltarget.FunctionNames(p, fo.Function), sparkQuote)
	req.Outputs, req.Label, req.ANSI = p.NumOutputs, p.IsClassifier(), !r.ansiOff
	res, a, note, err := r.askRows(ctx, p, req, rows.Len(), twins)
	if err != nil {
		return nil, err
	}
	res.Build = time.Duration((a.SetupMS + a.PlanMS + a.CodegenMS) * float64(time.Millisecond))
	res.Toolchain = note + "; the function form (" + fmt.Sprint(len(stmts)) + " CREATE FUNCTION)"
	return res, nil
}

// sparkQuote is name as a Spark SQL identifier.
func sparkQuote(name string) string { return "`" + strings.ReplaceAll(name, "`", "``") + "`" }

// askRows sends req to the driver under the runner's Python and reads the
// answer into a Result (Run set, Build and Toolchain left to the caller
// but for the toolchain note returned).
func (r sparkRunner) askRows(ctx context.Context, p *compile.Program, req *sparkRequest, n int, twins []int) (*Result, *sparkAnswer, string, error) {
	python, chosen := r.python, r.python != ""
	if python == "" {
		var err error
		if python, chosen, err = SparkPython(); err != nil {
			return nil, nil, "", err
		}
	}
	a, version, err := askSpark(ctx, python, req)
	if err != nil {
		if !chosen && strings.Contains(err.Error(), "did not start") {
			return nil, nil, "", fmt.Errorf("%w: %v", ErrSkip, err)
		}
		return nil, nil, "", err
	}
	if !a.OK {
		return nil, nil, "", fmt.Errorf("spark: run: %v", errors.New(a.Error))
	}
	if err := checkCodegen(a); err != nil {
		return nil, nil, "", err
	}
	res, err := sparkResult(p, a, n, twins)
	if err != nil {
		return nil, nil, "", err
	}
	res.Run = time.Duration(a.RunMS * float64(time.Millisecond))
	ansi := "on"
	if r.ansiOff {
		ansi = "off"
	}
	note := fmt.Sprintf("Spark %s, local mode through PySpark (%s), spark.sql.ansi.enabled %s%s", version, python, ansi, codegenNote(a))
	return res, a, note, nil
}
