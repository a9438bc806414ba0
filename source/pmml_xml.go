package source

// The XML layer of the PMML reader: one pass over the document that keeps
// only the elements (their names, attributes and, for Array, their text)
// and refuses what could make a small file cost much: a document type
// declaration (so no entity of any kind, internal or external, is ever
// defined, let alone expanded: the "billion laughs" and external-entity
// attacks stop at the <!DOCTYPE), entity references other than XML's five
// and numeric ones, and nesting deeper than pmmlMaxDepth. Memory stays in
// proportion to the file: an element costs at least four bytes of input
// ("<a/>") and a bounded number of bytes of memory. (encoding/xml supplies
// only the Attr type.)

import (
	"bytes"
	"encoding/xml"
	"errors"
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"
)

// pmmlMaxDepth caps element nesting. A PMML tree nests one Node element per
// level inside about ten levels of wrappers; 2,000 takes trees far deeper
// than any learner grows and keeps the reader's recursion shallow.
const pmmlMaxDepth = 2000

// xel is one element of the document.
type xel struct {
	name string     // local name; "" for an element in another namespace (an extension)
	attr []xml.Attr // as written
	kids []*xel
	text []byte // character data, kept for Array elements only
	off  int64  // byte offset of the start tag
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

// parsePMMLXML reads data into its element tree and returns the root. It is
// a small scanner of its own rather than encoding/xml's tokenizer, which
// reads a byte at a time through an interface and allocates per token: on
// a 45 MB model it took four fifths of the read. It checks what a reader
// of PMML depends on (tags nest and match, attributes are quoted, entity
// references are XML's five or numeric) and skips comments, processing
// instructions and text outside Array elements.
func parsePMMLXML(data []byte, name string) (*xel, error) {
	var root *xel
	var stack []*xel
	var open [][]byte // the raw names of the open elements
	errAt := func(off int, format string, args ...any) error {
		return fmt.Errorf("%s:%d: %s", name, lineOf(data, int64(off)), fmt.Sprintf(format, args...))
	}
	bad := func(off int, format string, args ...any) error {
		return errAt(off, "not well-formed XML: "+format, args...)
	}
	i := 0
	for i < len(data) {
		lt := bytes.IndexByte(data[i:], '<')
		if lt < 0 {
			lt = len(data) - i
		}
		if text := data[i : i+lt]; len(text) > 0 {
			if len(stack) > 0 && stack[len(stack)-1].name == "Array" {
				t, err := unescape(text)
				if err != nil {
					return nil, bad(i, "%v", err)
				}
				e := stack[len(stack)-1]
				e.text = append(e.text, t...)
			} else if len(stack) == 0 && len(bytes.TrimLeft(text, " \t\r\n\ufeff")) > 0 {
				return nil, errAt(i, "text outside the root element")
			}
		}
		i += lt
		if i >= len(data) {
			break
		}
		off := i
		rest := data[i:]
		switch {
		case bytes.HasPrefix(rest, []byte("<?")):
			j := bytes.Index(rest, []byte("?>"))
			if j < 0 {
				return nil, bad(off, "unterminated processing instruction")
			}
			i += j + 2
		case bytes.HasPrefix(rest, []byte("<!--")):
			j := bytes.Index(rest[4:], []byte("-->"))
			if j < 0 {
				return nil, bad(off, "unterminated comment")
			}
			i += 4 + j + 3
		case bytes.HasPrefix(rest, []byte("<![CDATA[")):
			j := bytes.Index(rest, []byte("]]>"))
			if j < 0 {
				return nil, bad(off, "unterminated CDATA section")
			}
			if len(stack) > 0 && stack[len(stack)-1].name == "Array" {
				e := stack[len(stack)-1]
				e.text = append(e.text, rest[9:j]...)
			}
			i += j + 3
		case bytes.HasPrefix(rest, []byte("<!")):
			kw := rest[2:]
			if k := bytes.IndexAny(kw, " \t\r\n[>"); k >= 0 {
				kw = kw[:k]
			}
			return nil, errAt(off, "the document has a type declaration (<!%s ...>); PMML needs none, and sawmill reads no DTD and expands no entity\nhint: remove the declaration", clip(kw))
		case bytes.HasPrefix(rest, []byte("</")):
			j := bytes.IndexByte(rest, '>')
			if j < 0 {
				return nil, bad(off, "unterminated end tag")
			}
			tag := bytes.TrimRight(rest[2:j], " \t\r\n")
			if len(stack) == 0 {
				return nil, errAt(off, "end tag </%s> with no element open", clip(tag))
			}
			if !bytes.Equal(tag, open[len(open)-1]) {
				return nil, errAt(off, "end tag </%s> closes <%s>", clip(tag), clip(open[len(open)-1]))
			}
			stack, open = stack[:len(stack)-1], open[:len(open)-1]
			i += j + 1
		default:
			e, raw, n, closed, err := startTag(rest)
			if err != nil {
				return nil, bad(off, "%v", err)
			}
			e.off = int64(off)
			if len(stack) >= pmmlMaxDepth {
				return nil, errAt(off, "elements nested more than %d deep", pmmlMaxDepth)
			}
			if len(stack) == 0 {
				if root != nil {
					return nil, errAt(off, "a second root element <%s>", clip(raw))
				}
				if e.name != "PMML" {
					return nil, errAt(off, "the root element is <%s>, not <PMML>", clip(raw))
				}
				root = e
			} else {
				p := stack[len(stack)-1]
				p.kids = append(p.kids, e)
			}
			if !closed {
				stack, open = append(stack, e), append(open, raw)
			}
			i += n
		}
	}
	if root == nil {
		return nil, fmt.Errorf("%s: no <PMML> element", name)
	}
	if len(stack) > 0 {
		return nil, fmt.Errorf("%s:%d: the file ends inside <%s>\nhint: the file is truncated; write it again", name, lineOf(data, int64(len(data))), clip(open[len(open)-1]))
	}
	return root, nil
}

// isSpace reports XML white space.
func isSpace(c byte) bool { return c == ' ' || c == '\t' || c == '\r' || c == '\n' }

// nameEnd is the length of the XML name at the start of b.
func nameEnd(b []byte) int {
	for j, c := range b {
		if isSpace(c) || c == '/' || c == '>' || c == '=' || c == '<' || c == '"' || c == '\'' {
			return j
		}
	}
	return len(b)
}

// startTag reads the start tag at the start of b ("<Name a='v' ...>" or
// "<Name .../>"): the element, its raw name, the tag's length, and whether
// it closes itself.
func startTag(b []byte) (e *xel, raw []byte, n int, closed bool, err error) {
	j := 1 + nameEnd(b[1:])
	raw = b[1:j]
	if len(raw) == 0 {
		return nil, nil, 0, false, errors.New("a '<' that starts no tag")
	}
	e = &xel{}
	if bytes.IndexByte(raw, ':') < 0 {
		e.name = string(raw)
	}
	for {
		for j < len(b) && isSpace(b[j]) {
			j++
		}
		if j >= len(b) {
			return nil, nil, 0, false, fmt.Errorf("the start tag <%s> is not closed", clip(raw))
		}
		switch {
		case b[j] == '>':
			return e, raw, j + 1, false, nil
		case b[j] == '/' && j+1 < len(b) && b[j+1] == '>':
			return e, raw, j + 2, true, nil
		}
		k := nameEnd(b[j:])
		if k == 0 {
			return nil, nil, 0, false, fmt.Errorf("unexpected %q in the start tag <%s>", b[j], clip(raw))
		}
		an := b[j : j+k]
		j += k
		for j < len(b) && isSpace(b[j]) {
			j++
		}
		if j >= len(b) || b[j] != '=' {
			return nil, nil, 0, false, fmt.Errorf("attribute %s of <%s> has no value", clip(an), clip(raw))
		}
		j++
		for j < len(b) && isSpace(b[j]) {
			j++
		}
		if j >= len(b) || (b[j] != '"' && b[j] != '\'') {
			return nil, nil, 0, false, fmt.Errorf("attribute %s of <%s> is not quoted", clip(an), clip(raw))
		}
		q := b[j]
		end := bytes.IndexByte(b[j+1:], q)
		if end < 0 {
			return nil, nil, 0, false, fmt.Errorf("attribute %s of <%s> is not closed", clip(an), clip(raw))
		}
		v := b[j+1 : j+1+end]
		if bytes.IndexByte(v, '<') >= 0 {
			return nil, nil, 0, false, fmt.Errorf("attribute %s of <%s> holds '<'", clip(an), clip(raw))
		}
		val, err := unescape(v)
		if err != nil {
			return nil, nil, 0, false, fmt.Errorf("attribute %s of <%s>: %v", clip(an), clip(raw), err)
		}
		a := xml.Attr{Value: string(val)}
		if p, l, ok := bytes.Cut(an, []byte(":")); ok {
			a.Name = xml.Name{Space: string(p), Local: string(l)}
		} else {
			a.Name.Local = string(an)
		}
		e.attr = append(e.attr, a)
		j += 1 + end + 1
	}
}

// unescape replaces XML's predefined entity references and character
// references in b; any other reference is an error (no entity is ever
// defined, so none is expanded).
func unescape(b []byte) ([]byte, error) {
	if bytes.IndexByte(b, '&') < 0 {
		return b, nil
	}
	out := make([]byte, 0, len(b))
	for len(b) > 0 {
		k := bytes.IndexByte(b, '&')
		if k < 0 {
			out = append(out, b...)
			break
		}
		out = append(out, b[:k]...)
		b = b[k:]
		semi := bytes.IndexByte(b[:min(len(b), 12)], ';')
		if semi < 0 {
			return nil, fmt.Errorf("an '&' that starts no entity reference")
		}
		ref := string(b[1:semi])
		b = b[semi+1:]
		switch ref {
		case "lt":
			out = append(out, '<')
		case "gt":
			out = append(out, '>')
		case "amp":
			out = append(out, '&')
		case "quot":
			out = append(out, '"')
		case "apos":
			out = append(out, '\'')
		default:
			var r uint64
			var err error
			switch {
			case strings.HasPrefix(ref, "#x"):
				r, err = strconv.ParseUint(ref[2:], 16, 32)
			case strings.HasPrefix(ref, "#"):
				r, err = strconv.ParseUint(ref[1:], 10, 32)
			default:
				return nil, fmt.Errorf("invalid character entity &%s; (sawmill knows only XML's predefined entities)", ref)
			}
			if err != nil || r == 0 || r > utf8.MaxRune || !utf8.ValidRune(rune(r)) {
				return nil, fmt.Errorf("invalid character reference &%s;", ref)
			}
			out = utf8.AppendRune(out, rune(r))
		}
	}
	return out, nil
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
