package gotarget

import (
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
	"github.com/sawmill-dev/sawmill/emit"
)

// BenchmarkTableBuild measures what the table layout's two ways of writing
// its arrays cost go build, against the forest's size: random ragged trees
// of about 2,000 nodes over 20 features, emitted with TablesLiteral and
// TablesBase64, each built as a fresh package (the standard library comes
// from the build cache) under GNU time -v. It reports the build's wall and
// CPU seconds and the peak RSS of its largest process; CPU seconds are the
// figure to read on a shared machine. MaxLiteralNodes is set from it:
//
//	go test ./emit/gotarget -run '^$' -bench TableBuild -benchtime 1x
//
// On 2026-12-03, 2 vCPUs shared with other work (load average 13 to 16, so
// wall times are several times the CPU times and not worth reading), Go
// 1.26.8, build CPU seconds and peak RSS, literal against base64:
//
//	 10,005 nodes  0.88 s against 0.35 s;  70 MB against 66 MB
//	 50,025 nodes  1.80 s against 0.33 s; 144 MB against 65 MB
//	100,050 nodes  3.78 s against 0.46 s; 222 MB against 66 MB
//	200,100 nodes  6.10 s against 0.34 s; 412 MB against 68 MB
//
// Literals cost about 30 µs of CPU and 2 KB of memory per node over the
// blob, whose build stays near a third of a second at any size: up to
// 50,000 nodes (MaxLiteralNodes) a literal table builds within about two
// seconds of CPU; beyond, the blob is the better trade.
func BenchmarkTableBuild(b *testing.B) {
	if _, err := os.Stat("/usr/bin/time"); err != nil {
		b.Skip("GNU time is not installed at /usr/bin/time: it measures peak memory")
	}
	for _, nodes := range []int{10_000, 50_000, 100_000, 200_000} {
		f := raggedForest(rand.New(rand.NewPCG(uint64(nodes), 3)), nodes/2000, 2000, 20)
		p, _, err := compile.Compile(f, compile.Options{})
		if err != nil {
			b.Fatal(err)
		}
		for _, tables := range []string{TablesLiteral, TablesBase64} {
			b.Run(fmt.Sprintf("nodes=%d/%s", p.NumNodes(), tables), func(b *testing.B) {
				files, err := Emit(p, Options{Package: "model", Layout: emit.Table, Tables: tables, NoTest: true})
				if err != nil {
					b.Fatal(err)
				}
				dir := b.TempDir()
				if err := os.MkdirAll(filepath.Join(dir, "model"), 0o755); err != nil {
					b.Fatal(err)
				}
				for _, file := range files {
					if err := os.WriteFile(filepath.Join(dir, "model", file.Name), file.Data, 0o644); err != nil {
						b.Fatal(err)
					}
				}
				main := "package main\n\nimport (\n\t\"fmt\"\n\n\t\"tables/model\"\n)\n\nfunc main() {\n\tvar x [model.NumFeatures]float64\n\tfmt.Println(model.Predict(&x))\n}\n"
				os.WriteFile(filepath.Join(dir, "main.go"), []byte(main), 0o644)
				os.WriteFile(filepath.Join(dir, "go.mod"), []byte("module tables\n\ngo 1.21\n"), 0o644)
				var wall, cpu, rss float64
				src := filepath.Join(dir, "model", SourceFile)
				for i := range b.N {
					// A comment of its own each time, so the package is built afresh.
					if err := os.WriteFile(src, append(files[0].Data, fmt.Sprintf("\n// build %d\n", i)...), 0o644); err != nil {
						b.Fatal(err)
					}
					build := exec.Command("/usr/bin/time", "-v", "go", "build", "-o", "tables", ".")
					build.Dir = dir
					build.Env = append(os.Environ(), "GOWORK=off", "GOFLAGS=", "GOTOOLCHAIN=local", "CGO_ENABLED=0")
					w, c, r := timed(b, build)
					wall, cpu, rss = wall+w.Seconds(), cpu+c.Seconds(), max(rss, float64(r>>20))
				}
				b.ReportMetric(wall/float64(b.N), "build-s")
				b.ReportMetric(cpu/float64(b.N), "build-cpu-s")
				b.ReportMetric(rss, "build-MB")
			})
		}
	}
}
