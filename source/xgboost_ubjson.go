package source

import (
	"encoding/binary"
	"fmt"
	"math"
	"strconv"
	"unicode/utf8"
)

// ubjParser reads Universal Binary JSON (ubjson.org, draft 12), the binary
// form XGBoost saves with a .ubj name: big-endian numbers, strings and keys
// with a length prefix, and optimised containers ('$' type, '#' count) for
// its arrays. It never trusts a declared length: every count is checked
// against the bytes left before anything is allocated, and nesting is capped
// at maxDepth.
type ubjParser struct {
	data []byte
	pos  int
}

func parseUBJSON(data []byte) (xval, error) {
	p := &ubjParser{data: data}
	v, err := p.value(0)
	if err != nil {
		return xval{}, err
	}
	if p.pos != len(p.data) {
		return xval{}, p.errorf("bytes after the end of the document")
	}
	return v, nil
}

func (p *ubjParser) errorf(format string, a ...any) error {
	return fmt.Errorf("byte %d: %s", p.pos, fmt.Sprintf(format, a...))
}

func (p *ubjParser) need(n int) error {
	if n < 0 || len(p.data)-p.pos < n {
		return p.errorf("unexpected end of file")
	}
	return nil
}

func (p *ubjParser) marker() (byte, error) {
	for {
		if err := p.need(1); err != nil {
			return 0, err
		}
		c := p.data[p.pos]
		p.pos++
		if c != 'N' { // no-op
			return c, nil
		}
	}
}

// size is the byte length of a number of the given marker, 0 when the marker
// is not a fixed-size number.
func size(m byte) int {
	switch m {
	case 'i', 'U', 'C':
		return 1
	case 'I':
		return 2
	case 'l', 'd':
		return 4
	case 'L', 'D':
		return 8
	}
	return 0
}

// num reads a number of marker m as float64 (integers exactly up to 2^53;
// larger int64 values are rounded, and are rejected where a count is read).
func (p *ubjParser) num(m byte) (float64, error) {
	n := size(m)
	if n == 0 {
		return 0, p.errorf("marker %q is not a number", m)
	}
	if err := p.need(n); err != nil {
		return 0, err
	}
	b := p.data[p.pos : p.pos+n]
	p.pos += n
	switch m {
	case 'i':
		return float64(int8(b[0])), nil
	case 'U', 'C':
		return float64(b[0]), nil
	case 'I':
		return float64(int16(binary.BigEndian.Uint16(b))), nil
	case 'l':
		return float64(int32(binary.BigEndian.Uint32(b))), nil
	case 'L':
		return float64(int64(binary.BigEndian.Uint64(b))), nil
	case 'd':
		return float64(math.Float32frombits(binary.BigEndian.Uint32(b))), nil
	default: // 'D'
		return math.Float64frombits(binary.BigEndian.Uint64(b)), nil
	}
}

// count reads a length: an integer marker and its value, which must be
// non-negative and at most the bytes left divided by min (the fewest bytes
// one element can take).
func (p *ubjParser) count(minBytes int) (int, error) {
	m, err := p.marker()
	if err != nil {
		return 0, err
	}
	if m == 'd' || m == 'D' || m == 'C' || size(m) == 0 {
		return 0, p.errorf("length has marker %q, not an integer", m)
	}
	f, err := p.num(m)
	if err != nil {
		return 0, err
	}
	left := len(p.data) - p.pos
	if f < 0 || f > float64(left/max(minBytes, 1)) {
		return 0, p.errorf("declared length %.0f does not fit in the %d bytes left", f, left)
	}
	return int(f), nil
}

func (p *ubjParser) str() (string, error) {
	n, err := p.count(1)
	if err != nil {
		return "", err
	}
	b := p.data[p.pos : p.pos+n]
	p.pos += n
	if !utf8.Valid(b) {
		return "", p.errorf("string is not UTF-8")
	}
	return string(b), nil
}

func (p *ubjParser) value(depth int) (xval, error) {
	m, err := p.marker()
	if err != nil {
		return xval{}, err
	}
	return p.typed(m, depth)
}

// typed reads a value whose marker m has been read.
func (p *ubjParser) typed(m byte, depth int) (xval, error) {
	switch m {
	case 'Z':
		return xval{}, nil
	case 'T', 'F':
		return xval{k: xBool, b: m == 'T'}, nil
	case 'S':
		s, err := p.str()
		return xval{k: xStr, s: s}, err
	case 'H': // high-precision number, as decimal text
		s, err := p.str()
		if err != nil {
			return xval{}, err
		}
		f, err := strconv.ParseFloat(s, 64)
		if err != nil && !isRangeErr(err) {
			return xval{}, p.errorf("%q is not a number", s)
		}
		return xval{k: xNum, n: f}, nil
	case '[', '{':
		if depth >= maxDepth {
			return xval{}, p.errorf("nested more than %d deep", maxDepth)
		}
		if m == '[' {
			return p.array(depth)
		}
		return p.object(depth)
	}
	f, err := p.num(m)
	return xval{k: xNum, n: f}, err
}

// header reads an optimised container's '$' type and '#' count, if any.
// It returns elemType 0 when untyped and n -1 when no count is given.
func (p *ubjParser) header(keyed bool) (elemType byte, n int, err error) {
	if err := p.need(1); err != nil {
		return 0, 0, err
	}
	if p.data[p.pos] == '$' {
		p.pos++
		if elemType, err = p.marker(); err != nil {
			return 0, 0, err
		}
		if size(elemType) == 0 && elemType != 'S' && elemType != '[' && elemType != '{' && elemType != 'H' {
			return 0, 0, p.errorf("container type %q is not supported", elemType)
		}
		if err := p.need(1); err != nil {
			return 0, 0, err
		}
		if p.data[p.pos] != '#' {
			return 0, 0, p.errorf("a typed container has no count")
		}
	}
	n = -1
	if p.data[p.pos] == '#' {
		p.pos++
		minBytes := max(size(elemType), 1)
		if keyed {
			minBytes++ // a key's length takes at least a byte
		}
		if n, err = p.count(minBytes); err != nil {
			return 0, 0, err
		}
	}
	return elemType, n, nil
}

func (p *ubjParser) array(depth int) (xval, error) {
	t, n, err := p.header(false)
	if err != nil {
		return xval{}, err
	}
	v := xval{k: xArr, nums: []float64{}}
	if t != 0 && size(t) > 0 {
		v.nums = make([]float64, n)
		for i := range v.nums {
			if v.nums[i], err = p.num(t); err != nil {
				return xval{}, err
			}
		}
		return v, nil
	}
	for i := 0; n < 0 || i < n; i++ {
		m := t
		if m == 0 {
			if m, err = p.marker(); err != nil {
				return xval{}, err
			}
			if n < 0 && m == ']' {
				return v, nil
			}
		}
		e, err := p.typed(m, depth+1)
		if err != nil {
			return xval{}, err
		}
		v.add(e)
	}
	return v, nil
}

func (p *ubjParser) object(depth int) (xval, error) {
	t, n, err := p.header(true)
	if err != nil {
		return xval{}, err
	}
	v := xval{k: xObj}
	for i := 0; n < 0 || i < n; i++ {
		if n < 0 {
			if err := p.need(1); err != nil {
				return xval{}, err
			}
			if p.data[p.pos] == '}' {
				p.pos++
				return v, nil
			}
		}
		k, err := p.str()
		if err != nil {
			return xval{}, err
		}
		m := t
		if m == 0 {
			if m, err = p.marker(); err != nil {
				return xval{}, err
			}
		}
		e, err := p.typed(m, depth+1)
		if err != nil {
			return xval{}, err
		}
		v.keys = append(v.keys, k)
		v.vals = append(v.vals, e)
	}
	return v, nil
}
