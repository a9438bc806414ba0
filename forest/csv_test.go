package forest

import (
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// TestCSVReader: records come with their file lines (a quoted cell may
// span lines), a record of the wrong width is reported and skipped, a
// syntax error is reported with its place and stops the read, and an empty
// file asks for a header.
func TestCSVReader(t *testing.T) {
	c, err := NewCSVReader(strings.NewReader("a,b\n1,2\n3\n\"x\ny\",4\n5,\"6\n"), "t.csv")
	require.NoError(t, err)
	require.Equal(t, []string{"a", "b"}, c.Header)
	var p Problems
	var got []string
	var lines []int
	for {
		rec, line, ok := c.Next(&p)
		if !ok {
			break
		}
		got = append(got, strings.Join(rec, "|"))
		lines = append(lines, line)
	}
	require.Equal(t, []string{"1|2", "x\ny|4"}, got)
	require.Equal(t, []int{2, 4}, lines)
	require.Equal(t, []string{
		"t.csv:3: has 1 cells, the header has 2",
		`t.csv: line 6, column 6: extraneous or missing " in quoted-field`,
	}, p.List())
	require.Equal(t, []string{"a", "b"}, c.Header, "the header outlives the records read after it")

	_, err = NewCSVReader(strings.NewReader(""), "e.csv")
	require.EqualError(t, err, "e.csv: empty file: expected a header line naming the columns")
}
