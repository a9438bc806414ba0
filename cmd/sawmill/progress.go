package main

import (
	"fmt"
	"io"
	"os"
	"strings"
	"time"
)

// isTerminal reports whether w is a character device such as a terminal,
// where a progress bar helps; pipes, files and buffers get none.
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	fi, err := f.Stat()
	return err == nil && fi.Mode()&os.ModeCharDevice != 0
}

// progressBar draws "label [=====>    ] done/total unit" on one line,
// redrawn at most ten times a second.
type progressBar struct {
	w     io.Writer
	label string
	unit  string
	total int
	last  time.Time
}

const barWidth = 30

func (p *progressBar) update(done int) {
	if done < p.total && time.Since(p.last) < 100*time.Millisecond {
		return
	}
	p.last = time.Now()
	fill := barWidth * done / max(p.total, 1)
	bar := strings.Repeat("=", fill)
	if fill < barWidth {
		bar += ">" + strings.Repeat(" ", barWidth-fill-1)
	}
	fmt.Fprintf(p.w, "\r%s [%s] %d/%d %s", p.label, bar, done, p.total, p.unit)
}

// clear erases the bar's line.
func (p *progressBar) clear() { fmt.Fprint(p.w, "\r\033[K") }
