package emit

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/stretchr/testify/require"
)

func TestInputsSHA256(t *testing.T) {
	// "abc" and "" are the FIPS 180-2 example messages (SHA-256 ba7816bf…
	// and e3b0c442…); the expected hashes of their checksum lists were
	// computed with GNU coreutils 9.1: `sha256sum spec.yaml | sha256sum` and
	// `sha256sum spec.yaml weights/w.npy | sha256sum`.
	fsys := fstest.MapFS{
		"spec.yaml":     {Data: []byte("abc")},
		"weights/w.npy": {Data: []byte{}},
	}
	tests := []struct {
		name    string
		files   []string
		want    string
		wantErr string
	}{
		{"spec only", []string{"spec.yaml"}, "8698bd0e76841335c69b9586ea02c4d66b46eb8736018d6ab8d815737709d16f", ""},
		{"spec and weights", []string{"spec.yaml", "weights/w.npy"}, "bfd05c245459d7f2cd7943f5e210e9ebb626383c890781becaba8913902bfbff", ""},
		{"order matters", []string{"weights/w.npy", "spec.yaml"}, "", ""},
		{"missing file", []string{"spec.yaml", "weights/gone.npy"}, "", "weights/gone.npy"},
		{"no files", nil, "", "no input files"},
		{"backslash", []string{`a\b`}, "", "backslash"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			got, err := InputsSHA256(fsys, tt.files)
			if tt.wantErr != "" {
				require.ErrorContains(t, err, tt.wantErr)
				return
			}
			require.NoError(t, err)
			require.Len(t, got, 64)
			if tt.want != "" {
				require.Equal(t, tt.want, got)
			} else {
				require.NotEqual(t, "bfd05c245459d7f2cd7943f5e210e9ebb626383c890781becaba8913902bfbff", got)
			}
		})
	}
}

// The documented recipe, run live when coreutils' sha256sum is installed:
// `sha256sum FILES | sha256sum` in the spec's folder prints the hash.
func TestInputsSHA256MatchesSha256sum(t *testing.T) {
	if _, err := exec.LookPath("sha256sum"); err != nil {
		t.Skip("sha256sum (GNU coreutils) not installed")
	}
	dir := t.TempDir()
	files := map[string]string{"fleet.yaml": "lanthorn: 1\nmodel: fleet\n", "w/a.npy": "\x93NUMPY\x01\x00", "w/b c.npy": "spaced name"}
	names := []string{"fleet.yaml", "w/a.npy", "w/b c.npy"}
	for name, data := range files {
		p := filepath.Join(dir, filepath.FromSlash(name))
		require.NoError(t, os.MkdirAll(filepath.Dir(p), 0o755))
		require.NoError(t, os.WriteFile(p, []byte(data), 0o644))
	}
	got, err := InputsSHA256(os.DirFS(dir), names)
	require.NoError(t, err)
	cmd := exec.Command("sh", "-c", `sha256sum "$@" | sha256sum`, "sh")
	cmd.Args = append(cmd.Args, names...)
	cmd.Dir = dir
	out, err := cmd.Output()
	require.NoError(t, err)
	require.Equal(t, strings.Fields(string(out))[0], got)
}
