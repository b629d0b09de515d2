package runtime

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
)

// refuseKeyFile returns an error when path holds keys, so that writing a
// ciphertext never replaces a secret key or evaluation keys given by
// mistake as an output file (eval -out secret.key would otherwise destroy
// the client's only copy). A missing file, or one that is not a lanthorn
// object, is no objection.
func refuseKeyFile(path string) error {
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	defer f.Close()
	var hdr [12]byte
	if _, err := io.ReadFull(f, hdr[:]); err != nil {
		return nil // shorter than a header: not one of ours
	}
	if !bytes.Equal(hdr[:8], objectMagic[:]) {
		return nil
	}
	switch k := objectKind(binary.LittleEndian.Uint16(hdr[10:12])); k {
	case kindSecretKey, kindEvalKeys:
		return fmt.Errorf("%s holds %s; refusing to overwrite it with a ciphertext (choose another output file)", path, k)
	}
	return nil
}
