package emit

import (
	"strings"
	"testing"

	"github.com/sawmill-dev/sawmill/compile"
)

// Format2Uses finds each format 2 construct once, at its first use, and the
// error names the target, the construct and the place, location first.
func TestFormat2Uses(t *testing.T) {
	p, err := compile.Parse(`program regression outputs=2 combine=sum transform=normalize compare=double base=0,0 accumulate=float32 scale=2 missing=-1,-1
feature "a" used
tree 0
  0 #0 leaf 1,2
tree 5 output=1
  0 #0 x0 <= 1 missing=left ? 1 : 2
  1 #3 x0 in {1,2} missing=right ? 3 : 4
  2 #4 leaf 1
  3 #7 leaf 2
  4 #8 x0 <= 2 missing=left+zero ? 5 : 6
  5 #9 leaf 3
  6 #10 leaf 4
`)
	if err != nil {
		t.Fatal(err)
	}
	var got []string
	for _, u := range Format2Uses(p) {
		got = append(got, u.Construct+" @ "+u.Where)
	}
	want := []string{
		ConstructAccumulate32 + " @ ", ConstructScale + " @ ", ConstructNormalize + " @ ",
		ConstructOutputTrees + " @ tree 5", ConstructSetSplits + " @ tree 5, node 3",
		ConstructZeroMissing + " @ tree 5, node 8", ConstructMissingValue + " @ ",
	}
	if strings.Join(got, "\n") != strings.Join(want, "\n") {
		t.Fatalf("got\n%s\nwant\n%s", strings.Join(got, "\n"), strings.Join(want, "\n"))
	}
	u := Format2Uses(p)[4]
	u.Target = "c"
	if msg := u.Error(); !strings.HasPrefix(msg, "tree 5, node 3: the c target cannot write set splits (trees[].categories) yet\nhint: ") {
		t.Fatalf("message %q", msg)
	}
	q, _ := compile.Parse("program regression outputs=1 combine=sum transform=none compare=double base=0\nfeature \"a\" used\ntree 0\n  0 #0 leaf 1\n")
	if uses := Format2Uses(q); len(uses) != 0 {
		t.Fatalf("a version 1 program uses %v", uses)
	}
}
