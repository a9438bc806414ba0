package source

import (
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// xkind is the kind of an xval.
type xkind uint8

const (
	xNull xkind = iota
	xBool
	xNum
	xStr
	xArr
	xObj
)

// xval is one value of an XGBoost model document, read from JSON or UBJSON.
// Arrays whose elements are all numbers keep them in nums (8 bytes each, so a
// model of half a million nodes stays small); other arrays keep items.
type xval struct {
	k     xkind
	b     bool
	n     float64 // xNum: decimals are read as float32 (XGBoost's floats are), integers exactly
	s     string
	nums  []float64 // xArr of numbers only; nil otherwise
	items []xval    // xArr of anything else
	keys  []string  // xObj, in file order
	vals  []xval
}

// maxDepth bounds the nesting of arrays and objects in a model document;
// XGBoost's own files nest about 8 deep.
const maxDepth = 64

// get returns the member called key of an object, or nil.
func (v *xval) get(key string) *xval {
	if v == nil || v.k != xObj {
		return nil
	}
	for i, k := range v.keys {
		if k == key {
			return &v.vals[i]
		}
	}
	return nil
}

// length is the number of elements of an array, 0 for anything else.
func (v *xval) length() int {
	if v == nil || v.k != xArr {
		return 0
	}
	if v.nums != nil {
		return len(v.nums)
	}
	return len(v.items)
}

// jsonParser reads XGBoost's JSON: standard JSON plus the bare tokens NaN,
// Infinity and -Infinity that XGBoost writes for non-finite floats.
type jsonParser struct {
	data []byte
	pos  int
}

func parseXGBJSON(data []byte) (xval, error) {
	p := &jsonParser{data: data}
	v, err := p.value(0)
	if err != nil {
		return xval{}, err
	}
	p.space()
	if p.pos != len(p.data) {
		return xval{}, p.errorf("text after the end of the document")
	}
	return v, nil
}

func (p *jsonParser) errorf(format string, a ...any) error {
	line, col := 1, 1
	for _, c := range p.data[:min(p.pos, len(p.data))] {
		if c == '\n' {
			line, col = line+1, 1
		} else {
			col++
		}
	}
	return fmt.Errorf("line %d, column %d: %s", line, col, fmt.Sprintf(format, a...))
}

func (p *jsonParser) space() {
	for p.pos < len(p.data) {
		switch p.data[p.pos] {
		case ' ', '\t', '\r', '\n':
			p.pos++
		default:
			return
		}
	}
}

func (p *jsonParser) value(depth int) (xval, error) {
	if depth > maxDepth {
		return xval{}, p.errorf("nested more than %d deep", maxDepth)
	}
	p.space()
	if p.pos >= len(p.data) {
		return xval{}, p.errorf("unexpected end of file")
	}
	switch c := p.data[p.pos]; {
	case c == '{':
		return p.object(depth)
	case c == '[':
		return p.array(depth)
	case c == '"':
		s, err := p.str()
		return xval{k: xStr, s: s}, err
	case c == 't' || c == 'f' || c == 'n':
		for _, w := range []struct {
			lit string
			v   xval
		}{{"true", xval{k: xBool, b: true}}, {"false", xval{k: xBool}}, {"null", xval{}}} {
			if p.lit(w.lit) {
				return w.v, nil
			}
		}
		return xval{}, p.errorf("unexpected %q", c)
	default:
		n, err := p.number()
		return xval{k: xNum, n: n}, err
	}
}

func (p *jsonParser) lit(s string) bool {
	if len(p.data)-p.pos >= len(s) && string(p.data[p.pos:p.pos+len(s)]) == s {
		p.pos += len(s)
		return true
	}
	return false
}

// number reads a JSON number, or NaN, Infinity, -Infinity. A number with a
// fraction or exponent is rounded once, from its decimal text, to float32:
// every float XGBoost stores is a float32, and reading through float64 first
// could round twice.
func (p *jsonParser) number() (float64, error) {
	switch {
	case p.lit("NaN"):
		return math.NaN(), nil
	case p.lit("Infinity"):
		return math.Inf(1), nil
	case p.lit("-Infinity"):
		return math.Inf(-1), nil
	}
	start := p.pos
	isFloat := false
	for p.pos < len(p.data) {
		c := p.data[p.pos]
		if c >= '0' && c <= '9' || c == '-' || c == '+' {
			p.pos++
			continue
		}
		if c == '.' || c == 'e' || c == 'E' {
			isFloat = true
			p.pos++
			continue
		}
		break
	}
	tok := string(p.data[start:p.pos])
	if tok == "" {
		return 0, p.errorf("unexpected %q", p.data[p.pos])
	}
	bits := 64
	if isFloat {
		bits = 32
	}
	f, err := strconv.ParseFloat(tok, bits)
	if err != nil && !isRangeErr(err) {
		p.pos = start
		return 0, p.errorf("%q is not a number", tok)
	}
	return f, nil
}

func isRangeErr(err error) bool {
	ne, ok := err.(*strconv.NumError)
	return ok && ne.Err == strconv.ErrRange
}

func (p *jsonParser) str() (string, error) {
	p.pos++ // the opening quote
	start := p.pos
	simple := true
	for p.pos < len(p.data) {
		c := p.data[p.pos]
		if c == '"' {
			break
		}
		if c == '\\' {
			simple = false
			p.pos++
		}
		p.pos++
	}
	if p.pos >= len(p.data) {
		return "", p.errorf("unterminated string")
	}
	raw := p.data[start:p.pos]
	p.pos++
	if simple {
		if !utf8.Valid(raw) {
			return "", p.errorf("string is not UTF-8")
		}
		return string(raw), nil
	}
	s, err := strconv.Unquote(`"` + string(raw) + `"`)
	if err != nil {
		return "", p.errorf("bad string escape")
	}
	return s, nil
}

func (p *jsonParser) array(depth int) (xval, error) {
	p.pos++
	v := xval{k: xArr, nums: []float64{}}
	p.space()
	if p.pos < len(p.data) && p.data[p.pos] == ']' {
		p.pos++
		return v, nil
	}
	for {
		e, err := p.value(depth + 1)
		if err != nil {
			return xval{}, err
		}
		v.add(e)
		p.space()
		if p.pos >= len(p.data) {
			return xval{}, p.errorf("unexpected end of file in an array")
		}
		switch p.data[p.pos] {
		case ',':
			p.pos++
		case ']':
			p.pos++
			return v, nil
		default:
			return xval{}, p.errorf("expected ',' or ']' in an array")
		}
	}
}

// add appends e to the array v, keeping numbers packed while it can.
func (v *xval) add(e xval) {
	if v.nums != nil && e.k == xNum {
		v.nums = append(v.nums, e.n)
		return
	}
	if v.nums != nil {
		for _, n := range v.nums {
			v.items = append(v.items, xval{k: xNum, n: n})
		}
		v.nums = nil
	}
	v.items = append(v.items, e)
}

func (p *jsonParser) object(depth int) (xval, error) {
	p.pos++
	v := xval{k: xObj}
	p.space()
	if p.pos < len(p.data) && p.data[p.pos] == '}' {
		p.pos++
		return v, nil
	}
	for {
		p.space()
		if p.pos >= len(p.data) || p.data[p.pos] != '"' {
			return xval{}, p.errorf("expected a member name")
		}
		k, err := p.str()
		if err != nil {
			return xval{}, err
		}
		p.space()
		if p.pos >= len(p.data) || p.data[p.pos] != ':' {
			return xval{}, p.errorf("expected ':' after %q", k)
		}
		p.pos++
		e, err := p.value(depth + 1)
		if err != nil {
			return xval{}, err
		}
		v.keys = append(v.keys, k)
		v.vals = append(v.vals, e)
		p.space()
		if p.pos >= len(p.data) {
			return xval{}, p.errorf("unexpected end of file in an object")
		}
		switch p.data[p.pos] {
		case ',':
			p.pos++
		case '}':
			p.pos++
			return v, nil
		default:
			return xval{}, p.errorf("expected ',' or '}' in an object")
		}
	}
}
