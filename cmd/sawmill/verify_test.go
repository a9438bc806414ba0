package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/verify"
)

// registeredTargets are the runner names verify can use in this build.
func registeredTargets(t *testing.T) []string {
	var names []string
	for _, r := range verify.Runners() {
		names = append(names, r.Name())
	}
	if len(names) == 0 {
		t.Skip("no target runner is registered in verify.Runners yet")
	}
	return names
}

// skipIfNotRun skips when the target's toolchain or engine is absent, as
// verify reported it, unless CI requires every engine.
func skipIfNotRun(t *testing.T, target, stdout string) {
	t.Helper()
	if !strings.Contains(stdout, "not run") {
		return
	}
	if os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
		t.Fatalf("%s could not run and SAWMILL_REQUIRE_ENGINES is set:\n%s", target, stdout)
	}
	t.Skipf("%s could not run here:\n%s", target, stdout)
}

func TestVerifyEveryTargetAgrees(t *testing.T) {
	for _, name := range registeredTargets(t) {
		t.Run(name, func(t *testing.T) {
			code, out, errs := sawmill(t, "verify", "testdata/logistic.json", "--target", name)
			skipIfNotRun(t, name, out)
			require.Equal(t, 0, code, "stdout:\n%s\nstderr:\n%s", out, errs)
			require.Contains(t, out, "coverage  leaves 3 of 3 (100.0%)")
			require.Regexp(t, `(?m)^`+name+`\S*\s+\S+\s+agree\s`, out)
			require.NotRegexp(t, `(?m) $`, out, "no trailing blanks")
		})
	}
}

// plantLeaf returns a tamper that adds 0.5 to the leaf of tree 0 that row x
// reaches, as the target will compare.
func plantLeaf(x []float64) func(string, string, string, *compile.Program) {
	return func(_, _, _ string, p *compile.Program) {
		leaf := p.Trees[0].Leaf(p.Compare, x)
		leaf[0] += 0.5
	}
}

// A fault planted in the emitted code of each target is caught: exit 1,
// the first mismatching row named by file and line, and shown in full.
func TestVerifyCatchesPlantedLeafFault(t *testing.T) {
	f, err := forest.ReadFile("testdata/logistic.json")
	require.NoError(t, err)
	rows, err := forest.ReadRowsFile("testdata/readings.csv", f.Features, forest.RowOptions{})
	require.NoError(t, err)
	const target = 2 // the row whose leaf is changed
	p, _, err := compile.Compile(f, compile.Options{})
	require.NoError(t, err)
	// The first row reaching the same leaf of tree 0 is the one to report.
	leaf := &p.Trees[0].Leaf(p.Compare, rows.Row(target))[0]
	first := -1
	for i := 0; i < rows.Len() && first < 0; i++ {
		if &p.Trees[0].Leaf(p.Compare, rows.Row(i))[0] == leaf {
			first = i
		}
	}
	wantLine := rows.Line[first]

	for _, name := range registeredTargets(t) {
		t.Run(name, func(t *testing.T) {
			verifyTamper = plantLeaf(rows.Row(target))
			defer func() { verifyTamper = nil }()
			code, out, errs := sawmill(t, "verify", "testdata/logistic.json", "--data", "testdata/readings.csv", "--target", name)
			skipIfNotRun(t, name, out)
			require.Equal(t, 1, code, "stdout:\n%s", out)
			require.Contains(t, errs, fmt.Sprintf("differs at testdata/readings.csv:%d", wantLine))
			require.Contains(t, out, fmt.Sprintf("first mismatch at testdata/readings.csv:%d", wantLine))
			require.Contains(t, out, "bearing_temp_c")
			require.Contains(t, out, "output 0 differs by")
		})
	}
}

// A threshold moved one float down is caught on the rows verify generates
// itself: a row sitting exactly on the threshold (leaf rows take the upper
// bound of their path, threshold rows the threshold) changes side.
func TestVerifyCatchesPlantedThresholdFault(t *testing.T) {
	for _, name := range registeredTargets(t) {
		t.Run(name, func(t *testing.T) {
			verifyTamper = func(_, _, _ string, p *compile.Program) {
				n := &p.Trees[0].Nodes[0]
				if p.Compare == compile.Single {
					n.Threshold = float64(math.Nextafter32(float32(n.Threshold), float32(math.Inf(-1))))
				} else {
					n.Threshold = math.Nextafter(n.Threshold, math.Inf(-1))
				}
				p.Midpoints32 = false // the split is no longer a float32's midpoint test
			}
			defer func() { verifyTamper = nil }()
			code, out, errs := sawmill(t, "verify", "testdata/logistic.json", "--target", name)
			skipIfNotRun(t, name, out)
			require.Equal(t, 1, code, "stdout:\n%s", out)
			require.Regexp(t, `differs at generated (leaf|threshold) row \d+ \(row \d+\)`, errs)
			require.Regexp(t, `(?m)^  bearing_temp_c\s+68\.5$`, out, "the row on the root's threshold 68.5")
		})
	}
}

func TestVerifyJSON(t *testing.T) {
	name := registeredTargets(t)[0]
	code, out, errs := sawmill(t, "verify", "testdata/logistic.json", "--target", name, "--json", "--data", "testdata/readings.csv")
	skipIfNotRun(t, name, out)
	require.Equal(t, 0, code, errs)
	var rep struct {
		Rows     int `json:"rows"`
		Coverage struct {
			Leaves    int `json:"leaves"`
			LeavesHit int `json:"leaves_hit"`
		} `json:"coverage"`
		Checks []struct {
			Target, Status string
			Rows, Matches  int
		} `json:"checks"`
	}
	require.NoError(t, json.Unmarshal([]byte(out), &rep), out)
	rows, err := forest.ReadRowsFile("testdata/readings.csv", []string{"vibration_rms", "bearing_temp_c"}, forest.RowOptions{})
	require.NoError(t, err)
	require.Equal(t, rows.Len(), rep.Rows)
	require.Equal(t, 3, rep.Coverage.Leaves)
	require.NotEmpty(t, rep.Checks)
	require.Equal(t, name, rep.Checks[0].Target)
	require.Equal(t, "agree", rep.Checks[0].Status)
	require.Equal(t, rep.Rows, rep.Checks[0].Matches)
}

// Without --require a target that could not run is printed and does not
// fail; with it, it does.
func TestVerifyVerdict(t *testing.T) {
	rep := &verify.Report{Checks: []*verify.Check{
		{Target: "go", Layout: "nested", Status: verify.Agree},
		{Target: "postgres", Layout: "nested", Status: verify.NotRun, Reason: "no server at 127.0.0.1:5432: connection refused"},
	}}
	require.NoError(t, verifyVerdict(rep, "", false))
	err := verifyVerdict(rep, "", true)
	require.ErrorContains(t, err, "postgres nested could not run (--require): no server at 127.0.0.1:5432")

	rep.Checks = append(rep.Checks, &verify.Check{Target: "c", Variant: "float", Layout: "table", Status: verify.Differ,
		First: &verify.Row{Index: 4, Line: 6, Origin: "line 6"}})
	err = verifyVerdict(rep, "readings.csv", false)
	require.ErrorContains(t, err, "c/float table differs at readings.csv:6")
}

func TestVerifyUsage(t *testing.T) {
	code, _, errs := sawmill(t, "verify", "testdata/logistic.json", "--target", "cobol")
	require.Equal(t, 2, code)
	require.Contains(t, errs, `target "cobol" is unknown`)
	code, _, errs = sawmill(t, "verify", "testdata/logistic.json", "--max-rows", "-1")
	require.Equal(t, 2, code)
	require.Contains(t, errs, "--max-rows -1")
	code, _, errs = sawmill(t, "verify", "testdata/nope.json")
	require.Equal(t, 1, code)
	require.Contains(t, errs, "testdata/nope.json: no such file or directory")
}

// verify --boards runs the C on a board under QEMU: the Cortex-M0 in the
// table layout agrees bit for bit on the generated rows.
func TestVerifyBoards(t *testing.T) {
	if testing.Short() {
		t.Skip("QEMU: without -short")
	}
	code, out, errOut := sawmill(t, "verify", pumpModel, "--boards", "--target", "c-board", "--variant", "m0", "--layout", "table")
	skipIfNotRun(t, "c-board", out)
	if code != 0 {
		t.Fatalf("exit %d: %s%s", code, out, errOut)
	}
	for _, want := range []string{"c-board/m0", "bit for bit", "Cortex-M0", "1 of 1 checks ran; 1 agree"} {
		if !strings.Contains(out, want) {
			t.Errorf("missing %q in:\n%s", want, out)
		}
	}
}
