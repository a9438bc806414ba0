package gotarget

import (
	"bufio"
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
	"github.com/sawmill-dev/sawmill/forest"
)

// TestMillionNodes measures what auto costs on a forest of about a million
// nodes (250 random ragged trees of about 4,000 nodes over 20 features):
// sawmill's part (read the model, compile, emit) and go build of the
// result, each under GNU time -v for wall time and peak RSS. It runs only
// when SAWMILL_GO_MILLION=1:
//
//	SAWMILL_GO_MILLION=1 go test ./emit/gotarget -run MillionNodes -v
//
// It fails when either side passes its memory budget (1 GB for sawmill,
// 2 GB for the largest go build process) and reports the times.
func TestMillionNodes(t *testing.T) {
	if dir := os.Getenv("SAWMILL_GO_MILLION_EMIT"); dir != "" {
		emitMillion(t, dir)
		return
	}
	if os.Getenv("SAWMILL_GO_MILLION") != "1" {
		t.Skip("set SAWMILL_GO_MILLION=1 to build a million-node forest (about a minute)")
	}
	if _, err := os.Stat("/usr/bin/time"); err != nil {
		t.Skip("GNU time is not installed at /usr/bin/time: it measures peak memory")
	}
	dir := t.TempDir()
	f := raggedForest(rand.New(rand.NewPCG(1, 1)), 250, 4000, 20)
	if err := forest.WriteFile(filepath.Join(dir, "model.json"), f); err != nil {
		t.Fatal(err)
	}
	self, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command("/usr/bin/time", "-v", self, "-test.run=^TestMillionNodes$")
	cmd.Env = append(os.Environ(), "SAWMILL_GO_MILLION_EMIT="+dir)
	wall, cpu, rss := timed(t, cmd)
	t.Logf("sawmill: read, compile and emit (auto): %v wall, %v CPU, %d MB peak RSS", wall, cpu, rss>>20)
	if rss > 1<<30 {
		t.Errorf("sawmill's part peaked at %d MB, budget 1 GB", rss>>20)
	}
	layout, _ := os.ReadFile(filepath.Join(dir, "layout"))
	src, _ := os.Stat(filepath.Join(dir, "model", SourceFile))
	t.Logf("auto chose %s; %s is %d MB", layout, SourceFile, src.Size()>>20)

	main := "package main\n\nimport (\n\t\"fmt\"\n\n\t\"million/model\"\n)\n\nfunc main() {\n\tvar x [model.NumFeatures]float64\n\tfmt.Println(model.Predict(&x))\n}\n"
	if err := os.WriteFile(filepath.Join(dir, "main.go"), []byte(main), 0o644); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "go.mod"), []byte("module million\n\ngo 1.21\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	build := exec.Command("/usr/bin/time", "-v", "go", "build", "-o", "million", ".")
	build.Dir = dir
	build.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=", "GOTOOLCHAIN=local", "CGO_ENABLED=0")
	wall, cpu, rss = timed(t, build)
	t.Logf("go build: %v wall, %v CPU, %d MB peak RSS of the largest process", wall, cpu, rss>>20)
	if rss > 2<<30 {
		t.Errorf("go build peaked at %d MB, budget 2 GB", rss>>20)
	}
	run := exec.Command(filepath.Join(dir, "million"))
	out, err := run.CombinedOutput()
	if err != nil {
		t.Fatalf("built program: %v\n%s", err, out)
	}
	x := make([]float64, 20)
	want := make([]float64, 1)
	f.Predict(x, want)
	if got := strings.TrimSpace(string(out)); got != fmt.Sprint([]float64{want[0]}) {
		t.Errorf("built program printed %s, interpreter %v", got, want)
	}
}

// emitMillion is the measured child: what sawmill compile does.
func emitMillion(t *testing.T, dir string) {
	f, err := forest.ReadFile(filepath.Join(dir, "model.json"))
	if err != nil {
		t.Fatal(err)
	}
	p, _, err := compile.Compile(f, compile.Options{})
	if err != nil {
		t.Fatal(err)
	}
	files, err := Emit(p, Options{Layout: emit.Auto})
	if err != nil {
		t.Fatal(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, "model"), 0o755); err != nil {
		t.Fatal(err)
	}
	for _, fl := range files {
		if err := forest.WriteFileAtomic(filepath.Join(dir, "model", fl.Name), fl.Data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if err := os.WriteFile(filepath.Join(dir, "layout"), []byte(layoutOf(p)), 0o644); err != nil {
		t.Fatal(err)
	}
}

// timed runs cmd under GNU time -v and returns its wall time, CPU time
// (user and system, children included) and peak RSS. On a loaded machine
// the CPU time is the steadier figure.
func timed(t testing.TB, cmd *exec.Cmd) (time.Duration, time.Duration, int64) {
	t.Helper()
	var stderr bytes.Buffer
	cmd.Stderr = &stderr
	start := time.Now()
	if out, err := cmd.Output(); err != nil {
		t.Fatalf("%v: %v\n%s\n%s", cmd.Args, err, out, stderr.Bytes())
	}
	wall := time.Since(start)
	var rss int64 = -1
	var cpu time.Duration
	sc := bufio.NewScanner(&stderr)
	for sc.Scan() {
		line := strings.TrimSpace(sc.Text())
		for _, p := range []string{"User time (seconds): ", "System time (seconds): "} {
			if v, ok := strings.CutPrefix(line, p); ok {
				s, err := strconv.ParseFloat(v, 64)
				if err != nil {
					t.Fatal(err)
				}
				cpu += time.Duration(s * float64(time.Second))
			}
		}
		if v, ok := strings.CutPrefix(line, "Maximum resident set size (kbytes): "); ok {
			kb, err := strconv.ParseInt(v, 10, 64)
			if err != nil {
				t.Fatal(err)
			}
			rss = kb << 10
		}
	}
	if rss < 0 {
		t.Fatalf("no peak RSS in GNU time's report:\n%s", stderr.Bytes())
	}
	return wall.Round(time.Millisecond), cpu, rss
}

// raggedForest grows trees of about size nodes by splitting a random leaf,
// each split on a random feature at a threshold inside the leaf's current
// range, so every node is reachable (the ragged forests of the project's
// notes on physical limits).
func raggedForest(rng *rand.Rand, trees, size, nf int) *forest.Forest {
	f := &forest.Forest{Task: forest.Regression, Combine: forest.Average, Transform: forest.NoTransform,
		InputPrecision: forest.Float64, BaseScore: []float64{0}}
	for j := 0; j < nf; j++ {
		f.Features = append(f.Features, fmt.Sprintf("f%02d", j))
	}
	type box struct{ lo, hi []float64 }
	for range trees {
		var t forest.Tree
		var boxes []box
		add := func(b box) int {
			t.Feature = append(t.Feature, -1)
			t.Threshold = append(t.Threshold, 0)
			t.Left = append(t.Left, -1)
			t.Right = append(t.Right, -1)
			t.MissingLeft = append(t.MissingLeft, rng.IntN(2) == 0)
			t.Value = append(t.Value, rng.Float64()*2-1)
			boxes = append(boxes, b)
			return len(t.Left) - 1
		}
		lo, hi := make([]float64, nf), make([]float64, nf)
		for j := range hi {
			hi[j] = 1
		}
		leaves := []int{add(box{lo, hi})}
		for len(t.Left) < size {
			k := rng.IntN(len(leaves))
			i := leaves[k]
			b := boxes[i]
			ft := rng.IntN(nf)
			th := b.lo[ft] + (b.hi[ft]-b.lo[ft])*(0.1+0.8*rng.Float64())
			lb := box{b.lo, append([]float64(nil), b.hi...)}
			lb.hi[ft] = th
			rb := box{append([]float64(nil), b.lo...), b.hi}
			rb.lo[ft] = th
			l, r := add(lb), add(rb)
			t.Feature[i], t.Threshold[i], t.Left[i], t.Right[i] = ft, th, l, r
			leaves[k] = l
			leaves = append(leaves, r)
		}
		f.Trees = append(f.Trees, t)
	}
	return f
}
