package spec

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"math/bits"
	"strconv"
	"strings"
)

// MaxElements is the largest number of elements a weight array (a .npy file
// or an inline list) may have. Larger claims are rejected before anything is
// allocated for them.
const MaxElements = 1 << 24

// maxNPYHeader bounds the header of a .npy file. Headers of plain numeric
// arrays are well under 256 bytes (NumPy's reader has a limit of its own,
// 10000 bytes by default as remembered).
const maxNPYHeader = 1 << 16

// maxNPYDims bounds the number of dimensions of a .npy array (NumPy's own
// limit, as remembered, is 32 before NumPy 2 and 64 since).
const maxNPYDims = 64

const npyMagic = "\x93NUMPY"

// npyType is an element type ReadNPY can convert to float64.
type npyType struct {
	size   int
	decode func(b []byte) float64
}

var le = binary.LittleEndian

// npyTypes maps a dtype character code and item size to its decoder.
var npyTypes = map[string]npyType{
	"f8": {8, func(b []byte) float64 { return math.Float64frombits(le.Uint64(b)) }},
	"f4": {4, func(b []byte) float64 { return float64(math.Float32frombits(le.Uint32(b))) }},
	"i8": {8, func(b []byte) float64 { return float64(int64(le.Uint64(b))) }},
	"i4": {4, func(b []byte) float64 { return float64(int32(le.Uint32(b))) }},
	"i2": {2, func(b []byte) float64 { return float64(int16(le.Uint16(b))) }},
	"i1": {1, func(b []byte) float64 { return float64(int8(b[0])) }},
	"u8": {8, func(b []byte) float64 { return float64(le.Uint64(b)) }},
	"u4": {4, func(b []byte) float64 { return float64(le.Uint32(b)) }},
	"u2": {2, func(b []byte) float64 { return float64(le.Uint16(b)) }},
	"u1": {1, func(b []byte) float64 { return float64(b[0]) }},
	"b1": {1, func(b []byte) float64 {
		if b[0] != 0 {
			return 1
		}
		return 0
	}},
}

const npySupported = "'<f8', '<f4', '<i8', '<i4' (and '<i2', '|i1', '<u8', '<u4', '<u2', '|u1', '|b1')"

// ReadNPY reads an array in NumPy's .npy format, versions 1.0, 2.0 and 3.0,
// and returns its elements as float64 in row-major (C) order with its shape.
// A scalar (shape ()) has one element and an empty shape.
//
// Element types: little-endian float64, float32, int64, int32 ('<f8', '<f4',
// '<i8', '<i4'), also int16, int8, unsigned integers and bool. The byte-order
// mark may be '<', '=' (native order, taken as little-endian; NumPy itself
// always writes '<' or '>') or, for one-byte types, '|' (or any other).
// Big-endian arrays, other dtypes, structured arrays, arrays of more than
// MaxElements elements, and data shorter or longer than the shape says are
// errors. Arrays stored in Fortran order are transposed into C order.
func ReadNPY(r io.Reader) (data []float64, shape []int, err error) {
	var pre [10]byte
	if n, err := io.ReadFull(r, pre[:8]); err != nil {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return nil, nil, fmt.Errorf("not a .npy file: only %d bytes long", n)
		}
		return nil, nil, err
	}
	if string(pre[:6]) != npyMagic {
		return nil, nil, errors.New(`not a .npy file: it does not start with "\x93NUMPY"`)
	}
	major, minor := pre[6], pre[7]
	var hlen int
	switch {
	case major == 1 && minor == 0:
		if _, err := io.ReadFull(r, pre[8:10]); err != nil {
			return nil, nil, truncated(err, "header length")
		}
		hlen = int(le.Uint16(pre[8:10]))
	case (major == 2 || major == 3) && minor == 0:
		var b [4]byte
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return nil, nil, truncated(err, "header length")
		}
		n := le.Uint32(b[:])
		if n > maxNPYHeader {
			return nil, nil, fmt.Errorf(".npy header is %d bytes long; the limit is %d", n, maxNPYHeader)
		}
		hlen = int(n)
	default:
		return nil, nil, fmt.Errorf("unsupported .npy format version %d.%d (supported: 1.0, 2.0, 3.0)", major, minor)
	}
	hdr := make([]byte, hlen)
	if _, err := io.ReadFull(r, hdr); err != nil {
		return nil, nil, truncated(err, "header")
	}
	h, err := parseNPYHeader(string(hdr))
	if err != nil {
		return nil, nil, fmt.Errorf(".npy header: %v", err)
	}
	typ, err := npyDtype(h.descr)
	if err != nil {
		return nil, nil, err
	}
	count := 1
	for _, d := range h.shape {
		hi, lo := bits.Mul64(uint64(count), uint64(d))
		if hi != 0 || lo > MaxElements {
			return nil, nil, fmt.Errorf(".npy shape %s has more than %d elements", pyShape(h.shape), MaxElements)
		}
		count = int(lo)
	}

	// Read in chunks so that a header claiming many elements on top of a
	// short file costs only what the file holds.
	want := count * typ.size
	const chunk = 1 << 16
	data = make([]float64, 0, min(count, chunk))
	buf := make([]byte, min(want, chunk))
	got := 0
	for got < want {
		k := min(want-got, len(buf))
		n, err := io.ReadFull(r, buf[:k])
		for j := 0; j+typ.size <= n; j += typ.size {
			data = append(data, typ.decode(buf[j:]))
		}
		got += n
		if err != nil {
			if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
				return nil, nil, fmt.Errorf(".npy data is %d bytes, shorter than the %d bytes its shape %s of %s needs", got, want, pyShape(h.shape), h.descr)
			}
			return nil, nil, err
		}
	}
	var extra [1]byte
	if n, err := io.ReadFull(r, extra[:]); n > 0 {
		return nil, nil, fmt.Errorf(".npy data is longer than the %d bytes its shape %s of %s needs", want, pyShape(h.shape), h.descr)
	} else if err != nil && !errors.Is(err, io.EOF) {
		return nil, nil, err
	}
	if h.fortran && len(h.shape) > 1 {
		data = fortranToC(data, h.shape)
	}
	return data, h.shape, nil
}

func truncated(err error, what string) error {
	if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
		return fmt.Errorf("not a .npy file: it ends inside the %s", what)
	}
	return err
}

// npyDtype finds the decoder of a dtype descriptor such as '<f8'.
func npyDtype(descr string) (npyType, error) {
	if len(descr) != 3 {
		return npyType{}, fmt.Errorf("unsupported .npy dtype %s; supported: %s", strconv.Quote(descr), npySupported)
	}
	order, code := descr[0], descr[1:]
	typ, ok := npyTypes[code]
	if !ok {
		return npyType{}, fmt.Errorf("unsupported .npy dtype '%s'; supported: %s", descr, npySupported)
	}
	switch order {
	case '<', '=':
	case '|':
		if typ.size != 1 {
			return npyType{}, fmt.Errorf("invalid .npy dtype '%s': '|' (no byte order) is only for one-byte types", descr)
		}
	case '>':
		if typ.size != 1 {
			return npyType{}, fmt.Errorf("big-endian .npy dtype '%s' is not supported; save the array as little-endian, e.g. a.astype('<%s')", descr, code)
		}
	default:
		return npyType{}, fmt.Errorf("unsupported .npy dtype '%s'; supported: %s", descr, npySupported)
	}
	return typ, nil
}

// fortranToC reorders column-major data of the given shape into row-major.
func fortranToC(f []float64, shape []int) []float64 {
	c := make([]float64, len(f))
	if len(f) == 0 {
		return c
	}
	nd := len(shape)
	stride := make([]int, nd) // Fortran strides
	s := 1
	for k := 0; k < nd; k++ {
		stride[k] = s
		s *= shape[k]
	}
	idx := make([]int, nd)
	off := 0
	for i := range c {
		c[i] = f[off]
		// Advance the C-order index, last axis fastest.
		for k := nd - 1; k >= 0; k-- {
			idx[k]++
			off += stride[k]
			if idx[k] < shape[k] {
				break
			}
			off -= idx[k] * stride[k]
			idx[k] = 0
		}
	}
	return c
}

// pyShape formats a shape as a Python tuple, as .npy headers write it.
func pyShape(shape []int) string {
	var b strings.Builder
	b.WriteByte('(')
	for i, d := range shape {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(strconv.Itoa(d))
	}
	if len(shape) == 1 {
		b.WriteByte(',')
	}
	b.WriteByte(')')
	return b.String()
}

type npyHeader struct {
	descr   string
	fortran bool
	shape   []int
}

// parseNPYHeader parses the Python dict literal of a .npy header. It reads
// the subset of Python literals such headers use: strings, True, False,
// integers, tuples and lists.
func parseNPYHeader(s string) (*npyHeader, error) {
	p := &pyLit{s: s}
	v, err := p.value(0)
	if err != nil {
		return nil, err
	}
	p.space()
	if p.i != len(p.s) {
		return nil, fmt.Errorf("unexpected %s after the dictionary", p.near())
	}
	d, ok := v.(pyDict)
	if !ok {
		return nil, errors.New("not a dictionary")
	}
	h := &npyHeader{}
	for _, k := range []string{"descr", "fortran_order", "shape"} {
		if _, ok := d[k]; !ok {
			return nil, fmt.Errorf("missing key '%s'", k)
		}
	}
	if len(d) != 3 {
		for k := range d {
			if k != "descr" && k != "fortran_order" && k != "shape" {
				return nil, fmt.Errorf("unexpected key %s (a .npy header has exactly 'descr', 'fortran_order' and 'shape')", strconv.Quote(k))
			}
		}
	}
	switch descr := d["descr"].(type) {
	case string:
		h.descr = descr
	case pyList, pyTuple:
		return nil, errors.New("structured arrays are not supported; save a plain numeric array")
	default:
		return nil, errors.New("'descr' is not a string")
	}
	fo, ok := d["fortran_order"].(bool)
	if !ok {
		return nil, errors.New("'fortran_order' is not True or False")
	}
	h.fortran = fo
	shape, ok := d["shape"].(pyTuple)
	if !ok {
		return nil, errors.New("'shape' is not a tuple")
	}
	if len(shape) > maxNPYDims {
		return nil, fmt.Errorf("'shape' has %d dimensions; the limit is %d", len(shape), maxNPYDims)
	}
	h.shape = make([]int, len(shape))
	for i, x := range shape {
		n, ok := x.(int)
		if !ok || n < 0 {
			return nil, errors.New("'shape' is not a tuple of non-negative integers")
		}
		h.shape[i] = n
	}
	return h, nil
}

type (
	pyDict  map[string]any
	pyTuple []any
	pyList  []any
)

type pyLit struct {
	s string
	i int
}

func (p *pyLit) space() {
	for p.i < len(p.s) && strings.IndexByte(" \t\r\n\f\v", p.s[p.i]) >= 0 {
		p.i++
	}
}

func (p *pyLit) near() string {
	if p.i >= len(p.s) {
		return "end of header"
	}
	return strconv.Quote(p.s[p.i:min(p.i+10, len(p.s))])
}

func (p *pyLit) value(depth int) (any, error) {
	if depth > 32 {
		return nil, errors.New("nested too deeply")
	}
	p.space()
	if p.i >= len(p.s) {
		return nil, errors.New("unexpected end of header")
	}
	switch c := p.s[p.i]; {
	case c == '{':
		p.i++
		d := pyDict{}
		_, err := p.items('}', func() error {
			k, err := p.value(depth + 1)
			if err != nil {
				return err
			}
			ks, ok := k.(string)
			if !ok {
				return errors.New("dictionary key is not a string")
			}
			p.space()
			if p.i >= len(p.s) || p.s[p.i] != ':' {
				return fmt.Errorf("expected ':' at %s", p.near())
			}
			p.i++
			v, err := p.value(depth + 1)
			if err != nil {
				return err
			}
			if _, dup := d[ks]; dup {
				return fmt.Errorf("duplicate key %s", strconv.Quote(ks))
			}
			d[ks] = v
			return nil
		})
		return d, err
	case c == '(' || c == '[':
		p.i++
		var xs []any
		end := byte(')')
		if c == '[' {
			end = ']'
		}
		trailingComma, err := p.items(end, func() error {
			v, err := p.value(depth + 1)
			xs = append(xs, v)
			return err
		})
		if err != nil {
			return nil, err
		}
		// (3) is a parenthesized integer, not a tuple; NumPy writes (3,).
		if c == '(' && len(xs) == 1 && !trailingComma {
			return xs[0], nil
		}
		if c == '[' {
			return pyList(xs), nil
		}
		return pyTuple(xs), nil
	case c == '\'' || c == '"':
		return p.str()
	case c == '-' || c >= '0' && c <= '9':
		j := p.i
		if c == '-' {
			j++
		}
		for j < len(p.s) && p.s[j] >= '0' && p.s[j] <= '9' {
			j++
		}
		digits := p.s[p.i:j]
		if j < len(p.s) && (p.s[j] == 'L' || p.s[j] == 'l') { // Python 2 long
			j++
		}
		p.i = j
		n, err := strconv.Atoi(digits)
		if err != nil {
			return nil, fmt.Errorf("bad integer %s", strconv.Quote(digits))
		}
		return n, nil
	default:
		j := p.i
		for j < len(p.s) && (p.s[j] >= 'a' && p.s[j] <= 'z' || p.s[j] >= 'A' && p.s[j] <= 'Z' || p.s[j] == '_') {
			j++
		}
		switch p.s[p.i:j] {
		case "True":
			p.i = j
			return true, nil
		case "False":
			p.i = j
			return false, nil
		case "None":
			p.i = j
			return nil, nil
		}
		return nil, fmt.Errorf("unexpected %s", p.near())
	}
}

// items parses comma-separated items up to the closing byte end, allowing a
// trailing comma, and tells whether there was one. The opening bracket has
// been consumed.
func (p *pyLit) items(end byte, item func() error) (trailingComma bool, err error) {
	for {
		p.space()
		if p.i < len(p.s) && p.s[p.i] == end {
			p.i++
			return trailingComma, nil
		}
		if err := item(); err != nil {
			return false, err
		}
		trailingComma = false
		p.space()
		if p.i >= len(p.s) {
			return false, errors.New("unexpected end of header")
		}
		switch p.s[p.i] {
		case ',':
			p.i++
			trailingComma = true
		case end:
			p.i++
			return false, nil
		default:
			return false, fmt.Errorf("expected ',' or '%c' at %s", end, p.near())
		}
	}
}

func (p *pyLit) str() (string, error) {
	q := p.s[p.i]
	var b strings.Builder
	for j := p.i + 1; j < len(p.s); j++ {
		c := p.s[j]
		switch {
		case c == q:
			p.i = j + 1
			return b.String(), nil
		case c == '\\' && j+1 < len(p.s):
			j++
			b.WriteByte(p.s[j])
		case c == '\n':
			return "", errors.New("unterminated string")
		default:
			b.WriteByte(c)
		}
	}
	return "", errors.New("unterminated string")
}

// WriteNPY writes data of the given shape (row-major) as a .npy file: format
// version 1.0, dtype '<f8', C order, with the header padded with spaces and a
// newline so that the data starts at a multiple of 64 bytes, as NumPy does.
func WriteNPY(w io.Writer, data []float64, shape []int) error {
	count := 1
	for _, d := range shape {
		if d < 0 {
			return fmt.Errorf("WriteNPY: negative dimension in shape %v", shape)
		}
		hi, lo := bits.Mul64(uint64(count), uint64(d))
		if hi != 0 || lo > math.MaxInt64/8 {
			return fmt.Errorf("WriteNPY: shape %v is too large", shape)
		}
		count = int(lo)
	}
	if count != len(data) {
		return fmt.Errorf("WriteNPY: shape %v has %d elements, data has %d", shape, count, len(data))
	}
	header := "{'descr': '<f8', 'fortran_order': False, 'shape': " + pyShape(shape) + ", }"
	// NumPy's rule: pad so that magic, version, length and header (with its
	// final newline) fill a multiple of 64 bytes; a full 64 if already even.
	hlen := len(header) + 1
	pad := 64 - (len(npyMagic)+2+2+hlen)%64
	if hlen+pad > math.MaxUint16 {
		return fmt.Errorf("WriteNPY: shape %v makes the header too long for format 1.0", shape)
	}
	buf := make([]byte, 0, 10+hlen+pad+8*min(len(data), 1<<13))
	buf = append(buf, npyMagic...)
	buf = append(buf, 1, 0)
	buf = le.AppendUint16(buf, uint16(hlen+pad))
	buf = append(buf, header...)
	buf = append(buf, strings.Repeat(" ", pad)...)
	buf = append(buf, '\n')
	for i, x := range data {
		buf = le.AppendUint64(buf, math.Float64bits(x))
		if len(buf) >= 1<<16 || i == len(data)-1 {
			if _, err := w.Write(buf); err != nil {
				return err
			}
			buf = buf[:0]
		}
	}
	if len(buf) > 0 {
		if _, err := w.Write(buf); err != nil {
			return err
		}
	}
	return nil
}
