package runtime

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"errors"
	"fmt"
	"hash"
	"io"
)

// File layout of keys and ciphertexts, little-endian:
//
//	offset size
//	0      8    magic "LNTHOBJ\x00"
//	8      2    format version (2)
//	10     2    object kind: 1 secret key, 2 evaluation keys, 3 ciphertexts
//	12     32   parameter fingerprint (SHA-256, see Params.Fingerprint)
//	44     8    payload length in bytes
//	52     32   SHA-256 of the payload
//	84     4    number of objects in the payload (1 for keys; for
//	            ciphertexts, the ciphertexts of one vector)
//	88     -    payload
//
// The payload is lattigo's own encoding (WriteTo) of the object; for
// evaluation keys it is a short list of the rotation steps followed by
// lattigo's encoding of each key (see evalkeys_codec.go); for ciphertexts
// it is lattigo's encoding of each ciphertext in turn, all of one degree
// and level. Readers check the header, the count and the length against
// what the parameters and the program's layout allow and the checksum
// before lattigo sees a byte of the payload. Version 1 (84 bytes, one
// object, no count) is not read.
const (
	headerSize    = 88
	formatVersion = 2
)

var objectMagic = [8]byte{'L', 'N', 'T', 'H', 'O', 'B', 'J', 0}

// wrongKindError is the error of a file that holds another kind of object
// than the one asked for; the server side tells a secret key apart by it.
type wrongKindError struct {
	got, want objectKind
}

// Error says what the file is and what was asked for.
func (e *wrongKindError) Error() string {
	return fmt.Sprintf("this is %s, not %s", e.got, e.want)
}

type objectKind uint16

const (
	kindSecretKey  objectKind = 1
	kindEvalKeys   objectKind = 2
	kindCiphertext objectKind = 3
)

// String names the kind as messages use it: "this is a secret key, not
// evaluation keys".
func (k objectKind) String() string {
	switch k {
	case kindSecretKey:
		return "a secret key"
	case kindEvalKeys:
		return "evaluation keys"
	case kindCiphertext:
		return "a ciphertext"
	}
	return fmt.Sprintf("an object of unknown kind %d", uint16(k))
}

// plural names the objects of a count: "file holds 3 ciphertexts".
func (k objectKind) plural() string {
	switch k {
	case kindSecretKey:
		return "secret keys"
	case kindEvalKeys:
		return "evaluation key sets"
	case kindCiphertext:
		return "ciphertexts"
	}
	return "objects"
}

// noun is the kind without its article, for "ciphertext for another model".
func (k objectKind) noun() string {
	switch k {
	case kindSecretKey:
		return "secret key"
	case kindEvalKeys:
		return "evaluation keys"
	case kindCiphertext:
		return "ciphertext"
	}
	return "object"
}

// countingWriter counts and hashes what passes through it.
type countingWriter struct {
	h hash.Hash
	w io.Writer // nil: hash only
	n int64
}

// Write hashes and counts b, then passes it on.
func (c *countingWriter) Write(b []byte) (int, error) {
	c.h.Write(b)
	c.n += int64(len(b))
	if c.w == nil {
		return len(b), nil
	}
	return c.w.Write(b)
}

// writeObject writes header and payload. body writes the payload; it is run
// twice, once to hash it and once to write it, so no copy of a large key set
// is held in memory. size is the payload size the object reports, count the
// number of objects it holds.
func writeObject(w io.Writer, p *Params, kind objectKind, count int, size int64, body func(io.Writer) error) error {
	run := func(dst io.Writer) (int64, []byte, error) {
		cw := &countingWriter{h: sha256.New(), w: dst}
		bw := bufio.NewWriterSize(cw, 1<<16)
		if err := body(bw); err != nil {
			return 0, nil, err
		}
		if err := bw.Flush(); err != nil {
			return 0, nil, err
		}
		return cw.n, cw.h.Sum(nil), nil
	}
	n, sum, err := run(nil)
	if err != nil {
		return fmt.Errorf("encode %s: %w", kind.noun(), err)
	}
	if n != size {
		return fmt.Errorf("encode %s: lattigo wrote %d bytes, expected %d", kind.noun(), n, size)
	}
	var hdr [headerSize]byte
	copy(hdr[0:8], objectMagic[:])
	binary.LittleEndian.PutUint16(hdr[8:10], formatVersion)
	binary.LittleEndian.PutUint16(hdr[10:12], uint16(kind))
	copy(hdr[12:44], p.fp[:])
	binary.LittleEndian.PutUint64(hdr[44:52], uint64(n))
	copy(hdr[52:84], sum)
	binary.LittleEndian.PutUint32(hdr[84:88], uint32(count))
	if _, err := w.Write(hdr[:]); err != nil {
		return err
	}
	n2, sum2, err := run(w)
	if err != nil {
		return err
	}
	if n2 != n || !bytes.Equal(sum, sum2) {
		return fmt.Errorf("encode %s: encoding changed between two passes", kind.noun())
	}
	return nil
}

// readObject reads and checks a header and returns the checked payload.
// count is the number of objects the payload must hold, maxPayload the
// largest payload the parameters allow for them, and sizeOK, if not nil,
// checks the declared length further (a ciphertext has one of a few sizes).
// These checks come before anything is allocated, and the payload buffer
// then only grows as data actually arrives, so a header that lies about the
// length costs nothing.
func readObject(r io.Reader, p *Params, want objectKind, count int, maxPayload int64, sizeOK func(int64) error) ([]byte, error) {
	var hdr [headerSize]byte
	n, err := io.ReadFull(r, hdr[:])
	switch {
	case n == 0 && (err == io.EOF || err == io.ErrUnexpectedEOF):
		return nil, errors.New("empty file")
	case err == io.ErrUnexpectedEOF:
		return nil, fmt.Errorf("truncated: header %d bytes, want %d", n, headerSize)
	case err != nil:
		return nil, err
	}
	if !bytes.Equal(hdr[0:8], objectMagic[:]) {
		return nil, errors.New("not a lanthorn key or ciphertext file (bad magic)")
	}
	if v := binary.LittleEndian.Uint16(hdr[8:10]); v != formatVersion {
		return nil, fmt.Errorf("file format version %d, this program reads version %d", v, formatVersion)
	}
	kind := objectKind(binary.LittleEndian.Uint16(hdr[10:12]))
	if kind != want {
		return nil, &wrongKindError{got: kind, want: want}
	}
	if !bytes.Equal(hdr[12:44], p.fp[:]) {
		return nil, fmt.Errorf("%s for another model (%s)", want.noun(), fingerprints(hdr[12:44], p.fp[:]))
	}
	if n := binary.LittleEndian.Uint32(hdr[84:88]); uint64(n) != uint64(count) {
		what := want.plural()
		if n == 1 {
			what = want.noun()
		}
		return nil, fmt.Errorf("file holds %d %s, this program takes %d", n, what, count)
	}
	size := binary.LittleEndian.Uint64(hdr[44:52])
	if size > uint64(maxPayload) {
		return nil, fmt.Errorf("header declares a payload of %d bytes, more than the %d bytes this program reads for %s", size, maxPayload, want)
	}
	if sizeOK != nil {
		if err := sizeOK(int64(size)); err != nil {
			return nil, err
		}
	}
	var buf bytes.Buffer
	buf.Grow(int(min(size, 1<<24)))
	got, err := buf.ReadFrom(io.LimitReader(r, int64(size)))
	if err != nil {
		return nil, err
	}
	if uint64(got) < size {
		return nil, fmt.Errorf("truncated: payload %d bytes, header says %d", got, size)
	}
	sum := sha256.Sum256(buf.Bytes())
	if !bytes.Equal(sum[:], hdr[52:84]) {
		return nil, errors.New("payload checksum mismatch: the file is corrupted")
	}
	return buf.Bytes(), nil
}
