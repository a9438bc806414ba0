package main

import (
	"sync"
	"testing"

	"github.com/sawmill-dev/sawmill/bench/train/synth"
	"github.com/sawmill-dev/sawmill/forest"
	"github.com/sawmill-dev/sawmill/forest/train"
)

var bench500 struct {
	once sync.Once
	f    *forest.Forest
	x    []float64
}

// BenchmarkInterpreter500 scores the rows of the invented benchmark table
// (20,000 x 20) with the reference interpreter, on a 500-tree forest grown
// on that table; it reports ns per row.
func BenchmarkInterpreter500(b *testing.B) {
	bench500.once.Do(func() {
		x, y := synth.Table(20000, 1)
		d := &train.Data{Features: synth.Names(), X: x, Task: forest.Classification, Classes: []string{"a", "b"}}
		for _, c := range y {
			d.Y = append(d.Y, float64(c))
		}
		res, err := train.Train(d, train.Settings{Trees: 500, Seed: 1, SkipImportance: true})
		if err != nil {
			b.Fatal(err)
		}
		bench500.f, bench500.x = res.Forest, x
	})
	f, x := bench500.f, bench500.x
	p := len(f.Features)
	n := len(x) / p
	out := make([]float64, f.NumOutputs())
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r := i % n
		f.Predict(x[r*p:(r+1)*p], out)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N), "ns/row")
}
