// Package synth makes the invented benchmark table: a seeded two-class
// problem with 20 numeric features, of which some carry signal, some are
// noisy copies of those, and the rest are pure noise, with 5% of the labels
// flipped. It stands for no real measurement.
package synth

import (
	"bufio"
	"fmt"
	"io"
	"math/rand/v2"
	"strconv"
)

// Features is the number of feature columns.
const Features = 20

// Table returns n rows of Features values, row-major, and a 0/1 label per row.
func Table(n int, seed uint64) (x []float64, y []int) {
	rng := rand.New(rand.NewPCG(seed, 0x5eed))
	x = make([]float64, n*Features)
	y = make([]int, n)
	for r := range n {
		c := rng.IntN(2)
		row := x[r*Features : (r+1)*Features]
		// 6 informative features: class-dependent means, unit noise.
		for j := 0; j < 6; j++ {
			shift := 0.7 * float64(j%3+1) / 3
			if c == 1 {
				shift = -shift
			}
			row[j] = shift + rng.NormFloat64()
		}
		// 6 noisy mixtures of the informative ones.
		for j := 6; j < 12; j++ {
			row[j] = 0.6*row[j-6] - 0.4*row[(j-5)%6] + 0.5*rng.NormFloat64()
		}
		// 8 noise features, two of them with few distinct values.
		for j := 12; j < 18; j++ {
			row[j] = rng.NormFloat64()
		}
		row[18] = float64(rng.IntN(10))
		row[19] = rng.Float64()
		if rng.Float64() < 0.05 {
			c = 1 - c
		}
		y[r] = c
	}
	return x, y
}

// Names returns the column names: f00..f19 and then the label.
func Names() []string {
	s := make([]string, Features)
	for j := range s {
		s[j] = fmt.Sprintf("f%02d", j)
	}
	return s
}

// WriteCSV writes the table with a header; the label column is "label",
// holding "a" or "b".
func WriteCSV(w io.Writer, x []float64, y []int) error {
	bw := bufio.NewWriter(w)
	for _, n := range Names() {
		bw.WriteString(n)
		bw.WriteByte(',')
	}
	bw.WriteString("label\n")
	var b []byte
	for r, c := range y {
		b = b[:0]
		for j := 0; j < Features; j++ {
			b = strconv.AppendFloat(b, x[r*Features+j], 'g', -1, 64)
			b = append(b, ',')
		}
		b = append(b, "ab"[c], '\n')
		bw.Write(b)
	}
	return bw.Flush()
}
