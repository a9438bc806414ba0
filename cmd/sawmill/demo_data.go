package main

// The demo's data is invented: a seeded generator of pump-health readings
// with physics-flavoured rules and noise. It stands for no real pump and no
// real measurement, and lives here, beside the demo, not in the library.

import (
	"bytes"
	"encoding/csv"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"time"
)

// Pump-health features and classes, in file order.
var (
	pumpFeatures = []string{"vibration_rms", "bearing_temp_c", "motor_current_a", "flow_m3h", "suction_pressure_kpa"}
	pumpClasses  = []string{"healthy", "cavitation", "bearing_wear", "misalignment"}
)

// pumpReading is one invented reading; NaN marks a missing cell.
type pumpReading struct {
	pump  string
	at    time.Time
	x     [5]float64
	state int // index in pumpClasses
}

// inventPumps draws n readings from the demo's rules:
//
//   - healthy pumps vibrate at about 1.8 mm/s RMS, run their bearings near
//     48 °C, draw current in proportion to flow, and see 100-120 kPa at the
//     suction side;
//   - cavitation comes with low suction pressure (vapour bubbles form when
//     it nears the liquid's vapour pressure), a drop in flow, a ragged
//     current and more vibration;
//   - bearing wear heats the bearing and raises vibration and, through
//     friction, the current a little;
//   - misalignment raises vibration most of all, warms the bearing a
//     little and costs current.
//
// The states overlap and 1% of labels are flipped at random, so no rule
// separates them exactly. missing is the share of cells left empty (sensor
// drop-outs); the training table has none.
func inventPumps(n int, seed uint64, missing float64) []pumpReading {
	rng := rand.New(rand.NewPCG(seed, 0x70756d70)) // "pump"
	start := time.Date(2026, 3, 2, 6, 0, 0, 0, time.UTC)
	out := make([]pumpReading, n)
	for i := range out {
		r := &out[i]
		r.pump = fmt.Sprintf("P%03d", 1+rng.IntN(40))
		r.at = start.Add(time.Duration(i) * 17 * time.Minute)
		u := rng.Float64()
		switch {
		case u < 0.55:
			r.state = 0
		case u < 0.70:
			r.state = 1
		case u < 0.85:
			r.state = 2
		default:
			r.state = 3
		}
		norm := rng.NormFloat64
		flow := 60 + 8*norm()
		vib := 1.8 + 0.35*norm()
		temp := 48 + 4*norm()
		current := 6 + 0.12*flow + 0.4*norm()
		suction := 110 + 7*norm()
		switch r.state {
		case 1: // cavitation
			suction = 78 + 9*norm()
			flow -= 9 + 4*math.Abs(norm())
			vib += 0.9 + 0.5*math.Abs(norm())
			current = 6 + 0.12*flow + 1.1*norm()
		case 2: // bearing wear
			temp += 14 + 6*math.Abs(norm())
			vib += 1.1 + 0.6*math.Abs(norm())
			current += 0.6 + 0.3*norm()
		case 3: // misalignment
			vib += 2.2 + 0.8*math.Abs(norm())
			temp += 5 + 3*norm()
			current += 1.3 + 0.4*norm()
		}
		if rng.Float64() < 0.01 {
			r.state = rng.IntN(len(pumpClasses))
		}
		r.x = [5]float64{
			round(max(vib, 0.2), 2), round(temp, 1), round(max(current, 0.5), 2),
			round(max(flow, 1), 1), round(max(suction, 20), 1),
		}
		for j := range r.x {
			if missing > 0 && rng.Float64() < missing {
				r.x[j] = math.NaN()
			}
		}
	}
	return out
}

func round(v float64, digits int) float64 {
	p := math.Pow(10, float64(digits))
	return math.Round(v*p) / p
}

// pumpCSV writes readings as CSV: pump_id, timestamp, the five features,
// and the state when withState. Missing cells are empty.
func pumpCSV(rs []pumpReading, withState bool) []byte {
	var b bytes.Buffer
	w := csv.NewWriter(&b)
	header := append([]string{"pump_id", "timestamp"}, pumpFeatures...)
	if withState {
		header = append(header, "state")
	}
	w.Write(header)
	for _, r := range rs {
		rec := []string{r.pump, r.at.Format("2006-01-02T15:04")}
		for _, v := range r.x {
			if math.IsNaN(v) {
				rec = append(rec, "")
			} else {
				rec = append(rec, strconv.FormatFloat(v, 'f', -1, 64))
			}
		}
		if withState {
			rec = append(rec, pumpClasses[r.state])
		}
		w.Write(rec)
	}
	w.Flush()
	return b.Bytes()
}
