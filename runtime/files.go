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
	return writeObject(w, p, kindSecretKey, int64(sk.sk.BinarySize()), func(w io.Writer) error {
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
	payload, err := readObject(r, p, kindSecretKey, size, func(n int64) error {
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
	return writeObject(w, p, kindEvalKeys, int64(k.Size()), k.writePayload)
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
	payload, err := readObject(r, p, kindEvalKeys, maxEvalKeysSize(p, req), nil)
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

// MarshalCiphertext writes ct, with its header, to w.
func MarshalCiphertext(w io.Writer, p *Params, ct *Ciphertext) (err error) {
	defer recoverTo(&err, "write ciphertext")
	if !p.ok() {
		return errors.New("nil parameters (or not made by NewParams)")
	}
	if err := p.checkCiphertext(ct); err != nil {
		return err
	}
	size, err := encodeCiphertextSize(p, ct.ct)
	if err != nil {
		return err
	}
	return writeObject(w, p, kindCiphertext, size, func(w io.Writer) error {
		_, err := ct.ct.WriteTo(w)
		return err
	})
}

// UnmarshalCiphertext reads a ciphertext written by MarshalCiphertext for p.
func UnmarshalCiphertext(r io.Reader, p *Params) (ct *Ciphertext, err error) {
	defer recoverTo(&err, "read ciphertext")
	if !p.ok() {
		return nil, errors.New("nil parameters (or not made by NewParams)")
	}
	payload, err := readObject(r, p, kindCiphertext, maxCiphertextSize(p), func(n int64) error {
		if _, _, ok := ciphertextShape(p, n); !ok {
			return fmt.Errorf("header declares a payload of %d bytes, the size of no ciphertext for these parameters", n)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	return decodeCiphertext(p, payload)
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

// WriteCiphertext writes ct to path atomically (mode 0644).
func WriteCiphertext(path string, p *Params, ct *Ciphertext) error {
	return writeFile(path, 0o644, func(w io.Writer) error { return MarshalCiphertext(w, p, ct) })
}

// ReadCiphertext reads a ciphertext file written by WriteCiphertext.
func ReadCiphertext(path string, p *Params) (*Ciphertext, error) {
	var ct *Ciphertext
	err := readFile(path, func(r io.Reader) (err error) {
		ct, err = UnmarshalCiphertext(r, p)
		return err
	})
	return ct, err
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
