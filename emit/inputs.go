package emit

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io/fs"
	"strings"
)

// InputsSHA256 hashes the files a spec was read from (spec.LoadWithFiles
// lists them: the spec's base name, then its weight files relative to the
// spec's folder), read from fsys rooted at the spec's folder. The hash is
// that of a checksum list, one line "HEX  NAME" per file in the order given,
// which is what
//
//	sha256sum gearbox.yaml weights/dense1_w.npy … | sha256sum
//
// prints in the spec's folder, so a reader can check a header's inputs line
// with standard tools. Names and contents are hashed, never a path above the
// spec's folder, so the hash is the same on every machine.
func InputsSHA256(fsys fs.FS, names []string) (string, error) {
	if len(names) == 0 {
		return "", fmt.Errorf("no input files to hash")
	}
	var list strings.Builder
	for _, name := range names {
		if strings.ContainsAny(name, "\\\n") {
			// sha256sum escapes such names; the spec parser never yields them.
			return "", fmt.Errorf("%q: a file name with a backslash or newline", name)
		}
		data, err := fs.ReadFile(fsys, name)
		if err != nil {
			return "", err
		}
		sum := sha256.Sum256(data)
		fmt.Fprintf(&list, "%s  %s\n", hex.EncodeToString(sum[:]), name)
	}
	sum := sha256.Sum256([]byte(list.String()))
	return hex.EncodeToString(sum[:]), nil
}
