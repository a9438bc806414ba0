package forest

import (
	"fmt"
	"strings"
)

// MaxProblems caps how many problems one file reports before giving up.
const MaxProblems = 20

// Problems is every problem found in one input, in the order found, each a
// complete message that starts with its location. It is returned as an error
// when non-empty.
type Problems struct {
	list      []string
	truncated bool
}

// Add records a problem; past MaxProblems it only notes that more exist.
func (p *Problems) Add(format string, args ...any) {
	if len(p.list) >= MaxProblems {
		p.truncated = true
		return
	}
	p.list = append(p.list, fmt.Sprintf(format, args...))
}

// Full reports whether the cap has been reached, so callers can stop early.
func (p *Problems) Full() bool { return len(p.list) >= MaxProblems }

// Len is the number of problems recorded.
func (p *Problems) Len() int { return len(p.list) }

// List returns the messages.
func (p *Problems) List() []string { return p.list }

// Err returns p as an error, or nil when there are no problems.
func (p *Problems) Err() error {
	if len(p.list) == 0 {
		return nil
	}
	return p
}

func (p *Problems) Error() string {
	s := strings.Join(p.list, "\n")
	if p.truncated {
		s += fmt.Sprintf("\n(stopped after %d problems)", MaxProblems)
	}
	return s
}
