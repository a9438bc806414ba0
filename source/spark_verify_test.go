package source

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

// TestSparkVerify compiles every Spark fixture to Go, C and SQL, builds and
// runs each with its real toolchain or engine (verify.Verify, with rows
// generated at every leaf and threshold added to the fixture's), and holds
// every target to the interpreter and, on the fixture's rows, to Spark's
// own outputs: bit for bit for decision trees and random forests, within
// the GBT bound of TestSparkFixtures for GBT models. A missing engine fails
// under SAWMILL_REQUIRE_ENGINES (CI) and is logged otherwise.
func TestSparkVerify(t *testing.T) {
	if testing.Short() {
		t.Skip("builds every fixture with every toolchain: not in -short")
	}
	for _, fx := range sparkFixtures(t, filepath.Join("testdata", "spark")) {
		t.Run(fx.name, func(t *testing.T) {
			f := loadSparkFixture(t, fx).Forest
			k := f.NumOutputs()
			rows := &forest.Rows{Features: f.Features}
			var expected []float64
			tol := 0.0
			gbt := strings.HasPrefix(fx.meta.Kind, "GBT")
			for i, x := range fx.rows {
				rows.Values = append(rows.Values, x...)
				rows.Line = append(rows.Line, i+2)
				w := fx.want[i]
				switch {
				case gbt && k == 1 && f.IsClassifier():
					expected = append(expected, w[2]) // probability_1
				case f.IsClassifier():
					expected = append(expected, w[1:1+k]...)
				default:
					expected = append(expected, w[0])
				}
				if gbt {
					_, bound := sparkGBTTerms(f, x)
					tol = max(tol, 2*bound+4*0x1p-53)
				}
			}
			rep, err := verify.Verify(context.Background(), f, rows, verify.VerifyOptions{
				Targets:           []string{"go", "c", "sql"},
				Variants:          []string{"double"}, // float C declines float64 models with normalize: no bound
				Probes:            true,
				Expected:          expected,
				ExpectedTolerance: tol,
				ExpectedSource:    "Spark " + fx.meta.Spark,
				TempDir:           t.TempDir(),
			})
			require.NoError(t, err)
			require.True(t, rep.Expected.OK(), "interpreter against Spark: %+v", rep.Expected.First)
			ran := 0
			for _, c := range rep.Checks {
				if c.Status == verify.NotRun {
					if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
						t.Fatalf("%s could not run, and SAWMILL_REQUIRE_ENGINES is set: %s", c.Name(), c.Reason)
					}
					t.Logf("%s not run here: %s", c.Name(), c.Reason)
					continue
				}
				require.Equal(t, verify.Agree, c.Status, "%s: %s", c.Name(), c.Reason)
				require.True(t, c.Expected.OK(), "%s against Spark: %+v", c.Name(), c.Expected.First)
				ran++
			}
			require.Positive(t, ran)
			t.Logf("%d rows (%d Spark's), %d checks agree with the interpreter and Spark (tolerance %g); leaves hit %d/%d",
				rep.Rows, rep.Given, ran, tol, rep.Coverage.LeavesHit, rep.Coverage.Leaves)
		})
	}
}
