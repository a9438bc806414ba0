package source

// The XML layer of the PMML reader: a streaming pass over the document with
// encoding/xml's tokenizer that keeps only the elements (their names,
// attributes and, for Array, their text) and refuses what could make a
// small file cost much: a document type declaration (so no entity of any
// kind, internal or external, is ever defined, let alone expanded: the
// "billion laughs" and external-entity attacks stop at the <!DOCTYPE),
// nesting deeper than pmmlMaxDepth, and text beyond what an Array needs.
// Memory stays in proportion to the file: an element costs at least four
// bytes of input ("<a/>") and a bounded number of bytes of memory.

import (
	"bytes"
	"encoding/xml"
	"errors"
	"fmt"
	"io"
	"strings"
)

// pmmlMaxDepth caps element nesting. A PMML tree nests one Node element per
// level inside about ten levels of wrappers; 2,000 takes trees far deeper
// than any learner grows and keeps the reader's recursion shallow.
const pmmlMaxDepth = 2000

// xel is one element of the document.
type xel struct {
	name  string     // local name; "" for an element in another namespace (an extension)
	attr  []xml.Attr // as written
	kids  []*xel
	text  []byte // character data, kept for Array elements only
	off   int64  // byte offset of the start tag
}

// get returns the attribute called key and whether it is present.
func (e *xel) get(key string) (string, bool) {
	for _, a := range e.attr {
		if a.Name.Space == "" && a.Name.Local == key {
			return a.Value, true
		}
	}
	return "", false
}

// attrOr returns the attribute called key, or def when it is absent.
func (e *xel) attrOr(key, def string) string {
	if v, ok := e.get(key); ok {
		return strings.TrimSpace(v)
	}
	return def
}

// child returns the first child element called name, or nil.
func (e *xel) child(name string) *xel {
	for _, k := range e.kids {
		if k.name == name {
			return k
		}
	}
	return nil
}

// children returns every child element called name, in document order.
func (e *xel) children(name string) []*xel {
	var out []*xel
	for _, k := range e.kids {
		if k.name == name {
			out = append(out, k)
		}
	}
	return out
}

// lineOf is the 1-based line of byte offset off in data.
func lineOf(data []byte, off int64) int {
	if off > int64(len(data)) {
		off = int64(len(data))
	}
	return bytes.Count(data[:off], []byte("\n")) + 1
}

// parsePMMLXML reads data into its element tree and returns the root.
func parsePMMLXML(data []byte, name string) (*xel, error) {
	d := xml.NewDecoder(bytes.NewReader(data))
	d.Strict = true
	// No entity beyond XML's five predefined ones is known: any other
	// reference is an error of the tokenizer (d.Entity stays nil).
	var root *xel
	var stack []*xel
	at := func() string { return fmt.Sprintf("%s:%d", name, lineOf(data, d.InputOffset())) }
	for {
		off := d.InputOffset()
		tok, err := d.RawToken()
		if err == io.EOF {
			break
		}
		if err != nil {
			var se *xml.SyntaxError
			if errors.As(err, &se) {
				return nil, fmt.Errorf("%s:%d: not well-formed XML: %s", name, se.Line, se.Msg)
			}
			return nil, fmt.Errorf("%s: not well-formed XML: %v", at(), err)
		}
		switch t := tok.(type) {
		case xml.Directive:
			return nil, fmt.Errorf("%s:%d: the document has a type declaration (<!%s ...>); PMML needs none, and sawmill reads no DTD and expands no entity\nhint: remove the declaration", name, lineOf(data, off), bytes.Fields(append([]byte(nil), t...))[0])
		case xml.StartElement:
			if len(stack) >= pmmlMaxDepth {
				return nil, fmt.Errorf("%s: elements nested more than %d deep", at(), pmmlMaxDepth)
			}
			if root != nil && len(stack) == 0 {
				return nil, fmt.Errorf("%s: a second root element <%s>", at(), t.Name.Local)
			}
			e := &xel{attr: t.Attr, off: off}
			if t.Name.Space == "" {
				e.name = t.Name.Local
			}
			if len(stack) == 0 {
				if t.Name.Space != "" || t.Name.Local != "PMML" {
					return nil, fmt.Errorf("%s: the root element is <%s>, not <PMML>", at(), qname(t.Name))
				}
				root = e
			} else {
				p := stack[len(stack)-1]
				p.kids = append(p.kids, e)
			}
			stack = append(stack, e)
		case xml.EndElement:
			if len(stack) == 0 {
				return nil, fmt.Errorf("%s: end tag </%s> with no element open", at(), qname(t.Name))
			}
			top := stack[len(stack)-1]
			if want := top.name; qname(t.Name) != want && !(want == "" && t.Name.Space != "") {
				return nil, fmt.Errorf("%s: end tag </%s> closes <%s>", at(), qname(t.Name), want)
			}
			stack = stack[:len(stack)-1]
		case xml.CharData:
			if len(stack) > 0 && stack[len(stack)-1].name == "Array" {
				e := stack[len(stack)-1]
				e.text = append(e.text, t...)
			} else if len(stack) == 0 && len(bytes.TrimSpace(t)) > 0 {
				return nil, fmt.Errorf("%s: text outside the root element", at())
			}
		}
	}
	if root == nil {
		return nil, fmt.Errorf("%s: no <PMML> element", name)
	}
	if len(stack) > 0 {
		return nil, fmt.Errorf("%s: the file ends inside <%s>\nhint: the file is truncated; write it again", at(), stack[len(stack)-1].name)
	}
	return root, nil
}

func qname(n xml.Name) string {
	if n.Space != "" {
		return n.Space + ":" + n.Local
	}
	return n.Local
}

// detectPMML accepts data whose first element, after an optional XML
// declaration, comments and white space, is <PMML.
func detectPMML(data []byte) bool {
	t := bytes.TrimPrefix(data, []byte("\ufeff"))
	for range 64 {
		t = bytes.TrimLeft(t, " \t\r\n")
		switch {
		case bytes.HasPrefix(t, []byte("<?")):
			i := bytes.Index(t, []byte("?>"))
			if i < 0 {
				return false
			}
			t = t[i+2:]
		case bytes.HasPrefix(t, []byte("<!--")):
			i := bytes.Index(t, []byte("-->"))
			if i < 0 {
				return false
			}
			t = t[i+3:]
		case bytes.HasPrefix(t, []byte("<!DOCTYPE")):
			// Detected, so that the reader refuses it with its reason.
			return bytes.Contains(t[:min(len(t), 4096)], []byte("PMML"))
		default:
			return bytes.HasPrefix(t, []byte("<PMML")) && len(t) > 5 && strings.IndexByte(" \t\r\n>/", t[5]) >= 0
		}
	}
	return false
}
