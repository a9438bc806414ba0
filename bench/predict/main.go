// Command predict-bench writes invented tables of five readings for
// run.sh, which times sawmill predict on them: a labelled one to grow the
// model on, and unlabelled ones of millions of rows to score. The rows
// stand for no real measurement.
//
//	go run ./bench/predict -rows 20000 -label -o train.csv
//	go run ./bench/predict -rows 2000000 -o rows.csv
package main

import (
	"bufio"
	"flag"
	"fmt"
	"math/rand/v2"
	"os"
	"strconv"
)

func main() {
	rows := flag.Int("rows", 20000, "rows to write")
	label := flag.Bool("label", false, "add a label column, state")
	out := flag.String("o", "", "CSV file to write")
	seed := flag.Uint64("seed", 1, "seed")
	flag.Parse()
	if err := write(*out, *rows, *label, *seed); err != nil {
		fmt.Fprintln(os.Stderr, "predict-bench:", err)
		os.Exit(1)
	}
}

func write(path string, n int, label bool, seed uint64) error {
	fh, err := os.Create(path)
	if err != nil {
		return err
	}
	w := bufio.NewWriterSize(fh, 1<<20)
	rng := rand.New(rand.NewPCG(seed, 7))
	w.WriteString("vibration_rms,bearing_temp_c,motor_current_a,flow_m3h,suction_pressure_kpa")
	if label {
		w.WriteString(",state")
	}
	w.WriteByte('\n')
	var b []byte
	x := make([]float64, 5)
	for range n {
		b = b[:0]
		for j, base := range []float64{1, 40, 10, 30, 70} {
			x[j] = base * (1 + 2*rng.Float64())
			if j > 0 {
				b = append(b, ',')
			}
			if label || rng.IntN(100) != 0 { // 1% of cells to score missing
				b = strconv.AppendFloat(b, x[j], 'f', 3, 64)
			}
		}
		if label {
			state := "healthy"
			switch {
			case x[4] < 95 && rng.IntN(10) != 0:
				state = "cavitation"
			case x[1] > 95 && x[0] > 2:
				state = "bearing_wear"
			case x[0] > 2.6:
				state = "misalignment"
			}
			b = append(b, ',')
			b = append(b, state...)
		}
		b = append(b, '\n')
		if _, err := w.Write(b); err != nil {
			return err
		}
	}
	if err := w.Flush(); err != nil {
		return err
	}
	return fh.Close()
}
