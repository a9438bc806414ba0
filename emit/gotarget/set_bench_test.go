package gotarget

import (
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// BenchmarkSetMembership measures the three ways a set split could test a
// category, on the inputs a set split sees (half members, the rest
// non-members inside and around the range), for lists of 3, 64 dense, 1,000
// dense and 1,000 sparse categories:
//
//	go test ./emit/gotarget -run '^$' -bench SetMembership -benchtime 1x
//
// It writes one Go program with, per list, a range check then a bitset
// word (as member does), a range check then a binary search of the sorted
// list (member's other form; "list-cmov" is a search written so the
// compiler can use conditional moves), and a switch over the categories
// (what nested code could write instead), builds it, and prints ns per
// test. The result chose useBitset's rule (see v2.go).
func BenchmarkSetMembership(b *testing.B) {
	if _, err := exec.LookPath("go"); err != nil {
		b.Skip("no go command on PATH: the benchmark builds the code it times")
	}
	rng := rand.New(rand.NewPCG(1, 2))
	lists := map[string][]int32{"3": {0, 3, 7}}
	dense := func(n, span int) []int32 {
		var c []int32
		for len(c) < n {
			c = append(c, int32(rng.IntN(span)))
			slices.Sort(c)
			c = slices.Compact(c)
		}
		return c
	}
	lists["64dense"] = dense(64, 128)
	lists["1000dense"] = dense(1000, 3000)
	lists["1000sparse"] = dense(1000, 1<<31-1)
	var src strings.Builder
	src.WriteString("package main\n\nimport (\n\t\"fmt\"\n\t\"math/rand/v2\"\n\t\"testing\"\n)\n\n")
	var cases []string
	for _, name := range []string{"3", "64dense", "1000dense", "1000sparse"} {
		cs := lists[name]
		id := strings.ReplaceAll(name, "dense", "d")
		id = strings.ReplaceAll(id, "sparse", "s")
		lo, hi := cs[0], cs[len(cs)-1]
		fmt.Fprintf(&src, "var list%s = []int32{%s}\n", id, joinInts(cs))
		if words := int(hi-lo)/64 + 1; words <= 1<<16 {
			w := make([]uint64, words)
			for _, c := range cs {
				w[(c-lo)>>6] |= 1 << ((c - lo) & 63)
			}
			var ws []string
			for _, x := range w {
				ws = append(ws, fmt.Sprintf("%#x", x))
			}
			fmt.Fprintf(&src, "var words%s = []uint64{%s}\n", id, strings.Join(ws, ", "))
			fmt.Fprintf(&src, `func bits%s(v float64) bool {
	if !(v >= %d && v < %d) {
		return false
	}
	k := uint32(int32(v) - %d)
	return words%s[k>>6]>>(k&63)&1 != 0
}
`, id, lo, int64(hi)+1, lo, id)
			cases = append(cases, fmt.Sprintf("{%q, bits%s, list%s}", name+"/bitset", id, id))
		}
		fmt.Fprintf(&src, `func search%s(v float64) bool {
	if !(v >= %d && v < %d) {
		return false
	}
	c := int32(v)
	l := list%s
	i, j := 0, len(l)
	for i < j {
		m := int(uint(i+j) >> 1)
		if l[m] < c {
			i = m + 1
		} else {
			j = m
		}
	}
	return i < len(l) && l[i] == c
}
`, id, lo, int64(hi)+1, id)
		fmt.Fprintf(&src, `func lower%s(v float64) bool {
	if !(v >= %d && v < %d) {
		return false
	}
	c := int32(v)
	l := list%s
	base, n := 0, len(l)
	for n > 1 {
		half := n >> 1
		if l[base+half] <= c {
			base += half
		}
		n -= half
	}
	return l[base] == c
}
`, id, lo, int64(hi)+1, id)
		fmt.Fprintf(&src, "func switch%s(v float64) bool {\n\tif !(v >= %d && v < %d) {\n\t\treturn false\n\t}\n\tswitch int32(v) {\n\tcase %s:\n\t\treturn true\n\t}\n\treturn false\n}\n",
			id, lo, int64(hi)+1, joinInts(cs))
		cases = append(cases, fmt.Sprintf("{%q, search%s, list%s}", name+"/list", id, id),
			fmt.Sprintf("{%q, lower%s, list%s}", name+"/list-cmov", id, id),
			fmt.Sprintf("{%q, switch%s, list%s}", name+"/switch", id, id))
	}
	fmt.Fprintf(&src, `
func main() {
	for _, c := range []struct {
		name string
		f    func(float64) bool
		l    []int32
	}{
		%s,
	} {
		rng := rand.New(rand.NewPCG(3, 4))
		xs := make([]float64, 4096)
		for i := range xs {
			if i%%2 == 0 {
				xs[i] = float64(c.l[rng.IntN(len(c.l))]) + 0.5
			} else {
				xs[i] = float64(c.l[0]) - 2 + rng.Float64()*float64(c.l[len(c.l)-1]-c.l[0]+4)
			}
		}
		n := 0
		r := testing.Benchmark(func(b *testing.B) {
			for i := 0; i < b.N; i++ {
				if c.f(xs[i&4095]) {
					n++
				}
			}
		})
		fmt.Printf("%%-20s %%6.2f ns/test (%%d members)\n", c.name, float64(r.T.Nanoseconds())/float64(r.N), n)
	}
}
`, strings.Join(cases, ",\n\t\t"))
	dir := b.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "main.go"), []byte(src.String()), 0o644); err != nil {
		b.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "go.mod"), []byte("module setbench\n\ngo 1.22\n"), 0o644); err != nil {
		b.Fatal(err)
	}
	for i := 0; i < b.N; i++ {
		cmd := exec.Command("go", "run", ".")
		cmd.Dir = dir
		out, err := cmd.CombinedOutput()
		if err != nil {
			b.Fatalf("%v\n%s", err, out)
		}
		b.Logf("\n%s", out)
	}
}

func joinInts(cs []int32) string {
	s := make([]string, len(cs))
	for i, c := range cs {
		s[i] = fmt.Sprint(c)
	}
	return strings.Join(s, ", ")
}
