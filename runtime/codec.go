package runtime

import (
	"bufio"
	"fmt"
	"io"
	"slices"
	"sync"

	"github.com/tuneinsight/lattigo/v5/core/rlwe"
	"github.com/tuneinsight/lattigo/v5/ring"
	"github.com/tuneinsight/lattigo/v5/ring/ringqp"
)

// Decoding lattigo objects safely.
//
// lattigo v5.0.7 trusts the length fields inside its encoding: a corrupted
// one makes it allocate whatever the field says (a makeslice panic, or an
// allocation the process cannot survive), and a truncated input read through
// its slice buffer recurses until the stack overflows. Neither can be
// recovered. So before lattigo reads a payload, the payload must match the
// layout of an object of the expected shape byte for byte, everywhere except
// in coefficient data: every length field, flag and constant is then the one
// lattigo itself writes for these parameters.
//
// The layout is found without depending on lattigo's format details: an
// object of the expected shape is encoded twice, once with every
// coefficient 0 and once with every coefficient 2^64-1. Bytes that are the
// same in both encodings are structure; the payload must have them too.
// Each encoding is scanned as it is written and only its structure bytes
// are kept (a few per polynomial row), so a layout costs one object of the
// shape, not copies of its encoding.

// layout is the structure of an object's encoding: its size and the bytes
// that do not depend on coefficients.
type layout struct {
	size int
	segs []segment // ascending, disjoint
}

// segment is a run of structure bytes at offset off.
type segment struct {
	off  int
	want []byte
}

// newLayout finds the layout of obj, whose coefficients must all be 0;
// fill sets them all to 2^64-1.
func newLayout(obj io.WriterTo, fill func()) (layout, error) {
	zero, n0, err := scanEncoding(obj, 0x00)
	if err != nil {
		return layout{}, err
	}
	fill()
	ones, n1, err := scanEncoding(obj, 0xff)
	if err != nil {
		return layout{}, err
	}
	if n0 != n1 {
		return layout{}, fmt.Errorf("layout: encodings of %d and %d bytes", n0, n1)
	}
	// A byte recorded in neither scan is 0 and 0xff: coefficient data. A
	// byte is structure when both encodings agree on it.
	var pos []int
	for i, z := range zero {
		if o, in := ones[i]; (in && o == z) || (!in && z == 0xff) {
			pos = append(pos, i)
		}
	}
	for i, o := range ones {
		if _, in := zero[i]; !in && o == 0x00 {
			pos = append(pos, i)
		}
	}
	slices.Sort(pos)
	l := layout{size: int(n0)}
	for _, i := range pos {
		v, in := ones[i]
		if !in {
			v = zero[i]
		}
		if k := len(l.segs) - 1; k >= 0 && l.segs[k].off+len(l.segs[k].want) == i {
			l.segs[k].want = append(l.segs[k].want, v)
		} else {
			l.segs = append(l.segs, segment{off: i, want: []byte{v}})
		}
	}
	return l, nil
}

// layoutCache memoizes the layouts of one parameter set by object shape: a
// layout costs two encodings of an object of that shape and depends on
// nothing else. Layouts are never modified once made.
type layoutCache struct {
	mu sync.Mutex
	m  map[string]layout
}

// layout returns the layout of the shape named key, made by build the
// first time.
func (p *Params) layout(key string, build func() (layout, error)) (layout, error) {
	p.lays.mu.Lock()
	defer p.lays.mu.Unlock()
	if l, ok := p.lays.m[key]; ok {
		return l, nil
	}
	l, err := build()
	if err != nil {
		return layout{}, err
	}
	p.lays.m[key] = l
	return l, nil
}

// scanEncoding encodes obj and records every byte that differs from ref.
func scanEncoding(obj io.WriterTo, ref byte) (map[int]byte, int64, error) {
	sc := &scanner{ref: ref, diff: map[int]byte{}}
	bw := bufio.NewWriterSize(sc, 1<<16)
	if _, err := obj.WriteTo(bw); err != nil {
		return nil, 0, fmt.Errorf("layout: %w", err)
	}
	if err := bw.Flush(); err != nil {
		return nil, 0, fmt.Errorf("layout: %w", err)
	}
	return sc.diff, int64(sc.n), nil
}

// scanner is the writer behind scanEncoding.
type scanner struct {
	ref  byte
	n    int
	diff map[int]byte
}

// Write records the bytes of b that differ from the reference byte.
func (s *scanner) Write(b []byte) (int, error) {
	for i, c := range b {
		if c != s.ref {
			s.diff[s.n+i] = c
		}
	}
	s.n += len(b)
	return len(b), nil
}

// match checks b against the structure of l, ignoring the byte ranges in
// skip (half-open), which the caller checks itself.
func (l layout) match(b []byte, skip ...[2]int) error {
	if len(b) != l.size {
		return fmt.Errorf("%d bytes, want %d", len(b), l.size)
	}
	for _, sg := range l.segs {
		for j, w := range sg.want {
			i := sg.off + j
			if b[i] != w && !skipped(i, skip) {
				return fmt.Errorf("malformed at byte %d", i)
			}
		}
	}
	return nil
}

func skipped(i int, skip [][2]int) bool {
	for _, r := range skip {
		if i >= r[0] && i < r[1] {
			return true
		}
	}
	return false
}

// readInto lets lattigo decode b into o, which must consume all of b.
func readInto(o io.ReaderFrom, b []byte) error {
	n, err := o.ReadFrom(&sliceReader{b: b})
	if err != nil {
		return err
	}
	if n != int64(len(b)) {
		return fmt.Errorf("decoded %d of %d bytes", n, len(b))
	}
	return nil
}

// sliceReader is a lattigo buffer.Reader over a byte slice. Unlike
// lattigo's buffer.Buffer it fails when asked to peek at an exhausted
// slice; buffer.Buffer returns an empty slice with no error there, which is
// what sends lattigo's slice readers into endless recursion on truncated
// input.
type sliceReader struct {
	b   []byte
	off int
}

// Read copies the next len(p) bytes, or fails with io.ErrUnexpectedEOF.
func (r *sliceReader) Read(p []byte) (int, error) {
	if len(p) == 0 {
		return 0, nil
	}
	if r.off >= len(r.b) {
		return 0, io.EOF
	}
	n := copy(p, r.b[r.off:])
	r.off += n
	if n < len(p) {
		return n, io.ErrUnexpectedEOF
	}
	return n, nil
}

// Size returns the number of unread bytes.
func (r *sliceReader) Size() int { return len(r.b) - r.off }

// Peek returns the next n bytes; it fails on an exhausted slice even for n = 0.
func (r *sliceReader) Peek(n int) ([]byte, error) {
	rest := len(r.b) - r.off
	if rest == 0 || n > rest || n < 0 {
		return r.b[r.off:], io.ErrUnexpectedEOF
	}
	return r.b[r.off : r.off+n], nil
}

// Discard skips n bytes.
func (r *sliceReader) Discard(n int) (int, error) {
	rest := len(r.b) - r.off
	if n > rest || n < 0 {
		r.off = len(r.b)
		return rest, io.ErrUnexpectedEOF
	}
	r.off += n
	return n, nil
}

func fillPoly(p ring.Poly) {
	for _, row := range p.Coeffs {
		for i := range row {
			row[i] = ^uint64(0)
		}
	}
}

func fillQP(p ringqp.Poly) {
	fillPoly(p.Q)
	fillPoly(p.P)
}

func fillGadget(g *rlwe.GadgetCiphertext) {
	for _, row := range g.Value {
		for _, v := range row {
			for _, qp := range v {
				fillQP(qp)
			}
		}
	}
}

// reduced checks that every coefficient of poly is below the prime of its
// row. lattigo reads coefficients as they come; one at or above its prime
// is no residue at all, and lattigo's arithmetic, which assumes residues,
// would compute on it silently.
func reduced(poly ring.Poly, moduli []uint64) error {
	if len(poly.Coeffs) > len(moduli) {
		return fmt.Errorf("%d rows, want at most %d", len(poly.Coeffs), len(moduli))
	}
	for i, row := range poly.Coeffs {
		q := moduli[i]
		for j, c := range row {
			if c >= q {
				return fmt.Errorf("coefficient %d of row %d is %d, not below its prime %d", j, i, c, q)
			}
		}
	}
	return nil
}

// reducedQP is reduced for a polynomial over Q and P.
func (p *Params) reducedQP(poly ringqp.Poly) error {
	if err := reduced(poly.Q, p.spec.Q); err != nil {
		return err
	}
	return reduced(poly.P, p.spec.P)
}

// reducedGadget is reduced for every polynomial of a key-switching key.
func (p *Params) reducedGadget(g *rlwe.GadgetCiphertext) error {
	for _, row := range g.Value {
		for _, v := range row {
			for _, qp := range v {
				if err := p.reducedQP(qp); err != nil {
					return err
				}
			}
		}
	}
	return nil
}
