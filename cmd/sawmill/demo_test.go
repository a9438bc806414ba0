package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"github.com/sawmill-dev/sawmill/forest"
)

func encodeModel(t *testing.T, f *forest.Forest) []byte {
	t.Helper()
	var b bytes.Buffer
	require.NoError(t, f.Encode(&b))
	return b.Bytes()
}

// The same seed gives the same data, the same model byte for byte and the
// same out-of-bag error, whatever the number of threads; another seed
// gives another model.
func TestDemoReproducible(t *testing.T) {
	_, a, csvA, err := demoModel(demoSeed, 300, 20, 1, nil)
	require.NoError(t, err)
	_, b, csvB, err := demoModel(demoSeed, 300, 20, 2, nil)
	require.NoError(t, err)
	require.Equal(t, csvA, csvB)
	require.Equal(t, encodeModel(t, a.Forest), encodeModel(t, b.Forest))
	require.Equal(t, math.Float64bits(a.OOB.Error), math.Float64bits(b.OOB.Error))

	_, c, csvC, err := demoModel(demoSeed+1, 300, 20, 1, nil)
	require.NoError(t, err)
	require.NotEqual(t, csvA, csvC)
	require.NotEqual(t, encodeModel(t, a.Forest), encodeModel(t, c.Forest))
}

// The invented data follows its own rules: class shares near the priors,
// each fault visible in the reading the rule says, missing cells only where
// asked for.
func TestDemoDataRules(t *testing.T) {
	rs := inventPumps(20000, 1, 0)
	count := make([]int, len(pumpClasses))
	mean := make([][5]float64, len(pumpClasses))
	for _, r := range rs {
		count[r.state]++
		for j, v := range r.x {
			require.False(t, math.IsNaN(v), "no missing cells in the training table")
			mean[r.state][j] += v
		}
	}
	for c := range mean {
		for j := range mean[c] {
			mean[c][j] /= float64(count[c])
		}
	}
	const vib, temp, suction = 0, 1, 4
	share := func(c int) float64 { return float64(count[c]) / float64(len(rs)) }
	require.InDelta(t, 0.55, share(0), 0.02, "healthy")
	for c := 1; c < 4; c++ {
		require.InDelta(t, 0.15, share(c), 0.02, pumpClasses[c])
	}
	require.Less(t, mean[1][suction], mean[0][suction]-20, "cavitation: low suction pressure")
	require.Greater(t, mean[2][temp], mean[0][temp]+10, "bearing wear: a hot bearing")
	require.Greater(t, mean[3][vib], mean[2][vib], "misalignment vibrates most")
	require.Greater(t, mean[2][vib], mean[0][vib], "bearing wear vibrates more than healthy")

	missing := 0
	for _, r := range inventPumps(5000, 2, 0.1) {
		for _, v := range r.x {
			if math.IsNaN(v) {
				missing++
			}
		}
	}
	require.InDelta(t, 0.1, float64(missing)/25000, 0.01)

	csv := string(pumpCSV(inventPumps(3, 1, 0), true))
	require.True(t, strings.HasPrefix(csv, "pump_id,timestamp,vibration_rms,bearing_temp_c,motor_current_a,flow_m3h,suction_pressure_kpa,state\n"), csv)
}

// The demo end to end in a temporary folder, smaller than its defaults to
// keep the test quick: every step runs, every file is left, the README
// states the model's own out-of-bag error, and verify agreed.
func TestDemoEndToEnd(t *testing.T) {
	// The demo is made inside a module, as in a clone of sawmill: go test
	// ./... there must not pick up the demo's packages.
	outer := t.TempDir()
	require.NoError(t, os.WriteFile(filepath.Join(outer, "go.mod"), []byte("module outer\n\ngo 1.21\n"), 0o644))
	dir := filepath.Join(outer, "pump-demo")
	code, out, errs := sawmill(t, "demo", "-o", dir, "--trees", "30", "--rows", "400")
	require.Equal(t, 0, code, "stdout:\n%s\nstderr:\n%s", out, errs)
	for i := 1; i <= 6; i++ {
		require.Contains(t, out, fmt.Sprintf("[%d/6]", i))
	}
	for _, name := range []string{demoTrainFile, demoScoreFile, demoModelFile, demoPredFile, demoVerifyTxt, demoVerifyJSN,
		"README.md", "charts/oob-error.svg", "charts/importance.svg",
		"go/pumphealth/model.go", "c/pump_health.c", "c/pump_health.h", "sql/pump_health.sqlite.sql", "sql/pump_health.ansi.sql"} {
		require.FileExists(t, filepath.Join(dir, name))
	}

	goList := func(in string) string {
		cmd := exec.Command("go", "list", "./...")
		cmd.Dir = in
		cmd.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=-mod=mod", "GOPROXY=off")
		b, _ := cmd.CombinedOutput()
		return string(b)
	}
	require.NotContains(t, goList(outer), "pumphealth", "the enclosing module does not see the demo's package")
	require.Contains(t, goList(dir), demoModule+"/go/"+demoGoPackage, "the demo's folder is a module of its own")

	f, err := forest.ReadFile(filepath.Join(dir, demoModelFile))
	require.NoError(t, err)
	require.Len(t, f.Trees, 30)
	var prov struct {
		OOBError float64 `json:"oob_error"`
	}
	require.NoError(t, json.Unmarshal(f.Provenance, &prov))
	readme, err := os.ReadFile(filepath.Join(dir, "README.md"))
	require.NoError(t, err)
	require.Contains(t, string(readme), fmt.Sprintf("Out-of-bag error: **%.4f**", prov.OOBError))
	require.Contains(t, out, fmt.Sprintf("out-of-bag error %.4f", prov.OOBError))
	require.Contains(t, string(readme), "invented")

	var rep struct {
		Checks []struct {
			Target, Variant, Layout, Status, Reason string
		} `json:"checks"`
	}
	b, err := os.ReadFile(filepath.Join(dir, demoVerifyJSN))
	require.NoError(t, err)
	require.NoError(t, json.Unmarshal(b, &rep))
	ran := map[string]bool{}
	for _, c := range rep.Checks {
		require.NotEqual(t, "differ", c.Status, c.Target)
		require.NotEqual(t, "failed", c.Status, "%s: %s", c.Target, c.Reason)
		if c.Status == "not run" && os.Getenv("SAWMILL_REQUIRE_ENGINES") != "" {
			t.Fatalf("%s did not run and SAWMILL_REQUIRE_ENGINES is set: %s", c.Target, c.Reason)
		}
		if c.Status == "agree" {
			ran[c.Target] = true
		}
	}
	require.True(t, ran["go"], "the Go target needs only the Go toolchain, which runs this test")

	// Exactly the files left are verified, each in the layout it was
	// written in: one Go package, the double C files, each engine's own
	// SQL file and the portable one on every engine, SQLite's both in the
	// embedded engine and in the system sqlite3 shell users run.
	count := map[string]int{}
	for _, c := range rep.Checks {
		count[c.Target+"/"+c.Variant]++
		if c.Target == "go" {
			src, err := os.ReadFile(filepath.Join(dir, "go", demoGoPackage, "model.go"))
			require.NoError(t, err)
			require.Contains(t, string(src), "Layout "+c.Layout+":", "the Go check ran the layout the file has")
		}
	}
	require.Equal(t, map[string]int{"go/": 1, "c/double": 1, "sqlite/": 1, "duckdb/": 1, "postgres/": 1,
		"sqlite/ansi": 1, "duckdb/ansi": 1, "postgres/ansi": 1, "sqlite/shell": 1, "sqlite/ansi-shell": 1}, count)

	// The scores the demo left are the interpreter's.
	pred, err := os.ReadFile(filepath.Join(dir, demoPredFile))
	require.NoError(t, err)
	code, want, _ := sawmill(t, "predict", filepath.Join(dir, demoModelFile), filepath.Join(dir, demoScoreFile), "--keep", "pump_id,timestamp")
	require.Equal(t, 0, code)
	require.Equal(t, want, string(pred))

	// A folder holding someone else's files is refused; an earlier demo's is
	// not (checked by the refusal alone, to keep the test short).
	other := t.TempDir()
	require.NoError(t, os.WriteFile(filepath.Join(other, "notes.txt"), []byte("mine"), 0o644))
	code, _, errs = sawmill(t, "demo", "-o", other)
	require.Equal(t, 1, code)
	require.Contains(t, errs, "exists and was not made by sawmill demo")
	require.NoError(t, demoFolder(dir, false))
}
