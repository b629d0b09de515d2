package runtime

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// MarshalSecretKey writes sk, with its header, to w.
func MarshalSecretKey(w io.Writer, p *Params, sk *SecretKey) (err error) {
	defer recoverTo(&err, "write secret key")
	if !p.ok() {
		return errors.New("nil parameters (or not made by NewParams)")
	}
	if err := p.checkSecretKey(sk); err != nil {
		return err
	}
	return writeObject(w, p, kindSecretKey, 1, int64(sk.sk.BinarySize()), func(w io.Writer) error {
		_, err := sk.sk.WriteTo(w)
		return err
	})
}

// UnmarshalSecretKey reads a secret key written by MarshalSecretKey for p.
func UnmarshalSecretKey(r io.Reader, p *Params) (sk *SecretKey, err error) {
	defer recoverTo(&err, "read secret key")
	if !p.ok() {
		return nil, errors.New("nil parameters (or not made by NewParams)")
	}
	size := secretKeySize(p)
	payload, err := readObject(r, p, kindSecretKey, 1, size, func(n int64) error {
		if n != size {
			return fmt.Errorf("header declares a payload of %d bytes; a secret key takes %d with these parameters", n, size)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return decodeSecretKey(p, payload)
}

// MarshalEvaluationKeys writes k, with its header, to w.
func MarshalEvaluationKeys(w io.Writer, p *Params, k *EvaluationKeys) (err error) {
	defer recoverTo(&err, "write evaluation keys")
	if !p.ok() {
		return errors.New("nil parameters (or not made by NewParams)")
	}
	if k == nil {
		return errors.New("nil evaluation keys")
	}
	if err := k.check(p, KeyRequest{}); err != nil {
		return err
	}
	return writeObject(w, p, kindEvalKeys, 1, int64(k.Size()), k.writePayload)
}

// UnmarshalEvaluationKeys reads evaluation keys written by
// MarshalEvaluationKeys for p, and checks that they hold every key req asks
// for. req also bounds what is read: a file holding more keys than req asks
// for is refused by its size, so a forged length costs no more than reading
// the keys the program needs.
func UnmarshalEvaluationKeys(r io.Reader, p *Params, req KeyRequest) (k *EvaluationKeys, err error) {
	defer recoverTo(&err, "read evaluation keys")
	if !p.ok() {
		return nil, errors.New("nil parameters (or not made by NewParams)")
	}
	payload, err := readObject(r, p, kindEvalKeys, 1, maxEvalKeysSize(p, req), nil)
	if err != nil {
		return nil, err
	}
	if k, err = decodeEvalKeys(p, payload); err != nil {
		return nil, err
	}
	if err := k.check(p, req); err != nil {
		return nil, err
	}
	return k, nil
}

// MarshalCiphertexts writes the ciphertexts of one vector, with their
// header, to w. They must share one degree and level, as the results of one
// program do.
func MarshalCiphertexts(w io.Writer, p *Params, cts []*Ciphertext) (err error) {
	defer recoverTo(&err, "write ciphertexts")
	if !p.ok() {
		return errors.New("nil parameters (or not made by NewParams)")
	}
	if len(cts) == 0 || len(cts) > maxCiphertexts {
		return fmt.Errorf("%d ciphertexts, want 1..%d", len(cts), maxCiphertexts)
	}
	var each int64
	for i, ct := range cts {
		if err := p.checkCiphertext(ct); err != nil {
			return fmt.Errorf("ciphertext %d: %w", i, err)
		}
		size, err := encodeCiphertextSize(p, ct.ct)
		if err != nil {
			return fmt.Errorf("ciphertext %d: %w", i, err)
		}
		if i > 0 && (ct.Degree() != cts[0].Degree() || ct.Level() != cts[0].Level()) {
			return fmt.Errorf("ciphertext %d at degree %d level %d, ciphertext 0 at degree %d level %d: one file holds ciphertexts of one shape",
				i, ct.Degree(), ct.Level(), cts[0].Degree(), cts[0].Level())
		}
		each = size
	}
	return writeObject(w, p, kindCiphertext, len(cts), each*int64(len(cts)), func(w io.Writer) error {
		for _, ct := range cts {
			if _, err := ct.ct.WriteTo(w); err != nil {
				return err
			}
		}
		return nil
	})
}

// MarshalCiphertext writes one ciphertext, with its header, to w.
func MarshalCiphertext(w io.Writer, p *Params, ct *Ciphertext) error {
	return MarshalCiphertexts(w, p, []*Ciphertext{ct})
}

// UnmarshalCiphertexts reads the n ciphertexts of one vector written by
// MarshalCiphertexts for p; n comes from the program's layout
// (Layout.Count) and is checked against the header before anything is
// allocated.
func UnmarshalCiphertexts(r io.Reader, p *Params, n int) (cts []*Ciphertext, err error) {
	defer recoverTo(&err, "read ciphertexts")
	if !p.ok() {
		return nil, errors.New("nil parameters (or not made by NewParams)")
	}
	if n < 1 || n > maxCiphertexts {
		return nil, fmt.Errorf("%d ciphertexts asked, want 1..%d", n, maxCiphertexts)
	}
	payload, err := readObject(r, p, kindCiphertext, n, int64(n)*maxCiphertextSize(p), func(size int64) error {
		if size%int64(n) == 0 {
			if _, _, ok := ciphertextShape(p, size/int64(n)); ok {
				return nil
			}
		}
		if n == 1 {
			return fmt.Errorf("header declares a payload of %d bytes, the size of no ciphertext for these parameters", size)
		}
		return fmt.Errorf("header declares a payload of %d bytes, the size of no %d ciphertexts of one shape for these parameters", size, n)
	})
	if err != nil {
		return nil, err
	}
	each := len(payload) / n
	cts = make([]*Ciphertext, n)
	for i := range cts {
		if cts[i], err = decodeCiphertext(p, payload[i*each:(i+1)*each]); err != nil {
			if n == 1 {
				return nil, err
			}
			return nil, fmt.Errorf("ciphertext %d: %w", i, err)
		}
	}
	return cts, nil
}

// UnmarshalCiphertext reads a file of one ciphertext.
func UnmarshalCiphertext(r io.Reader, p *Params) (*Ciphertext, error) {
	cts, err := UnmarshalCiphertexts(r, p, 1)
	if err != nil {
		return nil, err
	}
	return cts[0], nil
}

// WriteSecretKey writes sk to path atomically, readable by its owner only
// (mode 0600).
func WriteSecretKey(path string, p *Params, sk *SecretKey) error {
	return writeFile(path, 0o600, func(w io.Writer) error { return MarshalSecretKey(w, p, sk) })
}

// ReadSecretKey reads a secret key file written by WriteSecretKey.
func ReadSecretKey(path string, p *Params) (*SecretKey, error) {
	var sk *SecretKey
	err := readFile(path, func(r io.Reader) (err error) {
		sk, err = UnmarshalSecretKey(r, p)
		return err
	})
	return sk, err
}

// WriteEvaluationKeys writes k to path atomically (mode 0644).
func WriteEvaluationKeys(path string, p *Params, k *EvaluationKeys) error {
	return writeFile(path, 0o644, func(w io.Writer) error { return MarshalEvaluationKeys(w, p, k) })
}

// ReadEvaluationKeys reads an evaluation-keys file and checks that it holds
// every rotation key in req and, if req asks for it, a relinearization key
// (see UnmarshalEvaluationKeys).
func ReadEvaluationKeys(path string, p *Params, req KeyRequest) (*EvaluationKeys, error) {
	var k *EvaluationKeys
	err := readFile(path, func(r io.Reader) (err error) {
		k, err = UnmarshalEvaluationKeys(r, p, req)
		return err
	})
	return k, err
}

// WriteCiphertexts writes the ciphertexts of one vector to path
// atomically (mode 0644).
func WriteCiphertexts(path string, p *Params, cts []*Ciphertext) error {
	if err := refuseKeyFile(path); err != nil {
		return err
	}
	return writeFile(path, 0o644, func(w io.Writer) error { return MarshalCiphertexts(w, p, cts) })
}

// ReadCiphertexts reads a file written by WriteCiphertexts that must hold
// n ciphertexts.
func ReadCiphertexts(path string, p *Params, n int) ([]*Ciphertext, error) {
	var cts []*Ciphertext
	err := readFile(path, func(r io.Reader) (err error) {
		cts, err = UnmarshalCiphertexts(r, p, n)
		return err
	})
	return cts, err
}

// WriteCiphertext writes one ciphertext to path atomically (mode 0644).
func WriteCiphertext(path string, p *Params, ct *Ciphertext) error {
	return WriteCiphertexts(path, p, []*Ciphertext{ct})
}

// ReadCiphertext reads a file of one ciphertext.
func ReadCiphertext(path string, p *Params) (*Ciphertext, error) {
	cts, err := ReadCiphertexts(path, p, 1)
	if err != nil {
		return nil, err
	}
	return cts[0], nil
}

// writeFile writes through a temporary file in the same directory, synced
// and renamed over path, so a reader never sees a half-written file and a
// failure or a crash leaves the old file, or none, in place.
func writeFile(path string, mode os.FileMode, write func(io.Writer) error) error {
	s, err := stageFile(path, mode, write)
	if err != nil {
		return err
	}
	return s.commit()
}

// stagedFile is an output written in full to a temporary file beside its
// path, waiting to be renamed over it.
type stagedFile struct {
	tmp, path string
}

// stageFile writes a temporary file for path and syncs it. The file is
// created with mode 0600 and only then given mode, so a secret is never
// readable by others, not even briefly. On error nothing is left behind.
func stageFile(path string, mode os.FileMode, write func(io.Writer) error) (s *stagedFile, err error) {
	if st, err := os.Stat(path); err == nil && !st.Mode().IsRegular() {
		return nil, fmt.Errorf("%s: exists and is not a regular file", path)
	}
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp*")
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	tmp := f.Name()
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(tmp)
			err = fmt.Errorf("%s: %w", path, err)
		}
	}()
	if err = f.Chmod(mode); err != nil {
		return nil, err
	}
	bw := bufio.NewWriterSize(f, 1<<20)
	if err = write(bw); err != nil {
		return nil, err
	}
	if err = bw.Flush(); err != nil {
		return nil, err
	}
	if err = f.Sync(); err != nil {
		return nil, err
	}
	if err = f.Close(); err != nil {
		return nil, err
	}
	return &stagedFile{tmp: tmp, path: path}, nil
}

// commit renames the staged file over its path.
func (s *stagedFile) commit() error {
	if err := os.Rename(s.tmp, s.path); err != nil {
		os.Remove(s.tmp)
		return fmt.Errorf("%s: %w", s.path, err)
	}
	return nil
}

// abort removes the staged file.
func (s *stagedFile) abort() {
	os.Remove(s.tmp)
}

// readFile opens path and hands a buffered reader to read; errors name the
// file. Data after the object is an error too.
func readFile(path string, read func(io.Reader) error) error {
	f, err := os.Open(path)
	if err != nil {
		return err // *PathError already names the file
	}
	defer f.Close()
	if st, err := f.Stat(); err == nil && !st.Mode().IsRegular() {
		return fmt.Errorf("%s: not a regular file", path)
	}
	br := bufio.NewReaderSize(f, 1<<20)
	if err := read(br); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	if _, err := br.ReadByte(); err != io.EOF {
		if err == nil {
			return fmt.Errorf("%s: unexpected data after the end of the object", path)
		}
		return fmt.Errorf("%s: %w", path, err)
	}
	return nil
}
