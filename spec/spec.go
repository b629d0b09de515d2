package spec

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"unicode/utf8"

	"gopkg.in/yaml.v3"

	"github.com/lanthorn/lanthorn/ir"
)

// MaxSpecBytes is the largest spec file Parse and Load accept.
const MaxSpecBytes = 16 << 20

// maxErrors is how many problems an ErrorList holds at most; one more entry
// counts the rest.
const maxErrors = 200

// Load reads the spec at path and the weight files it names (relative to its
// directory).
func Load(path string) (*ir.Graph, error) {
	g, _, err := LoadWithFiles(path)
	return g, err
}

// LoadWithFiles is Load that also returns the files the spec reads, as
// ParseWithFiles does.
func LoadWithFiles(path string) (*ir.Graph, []string, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, nil, err
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, MaxSpecBytes+1))
	if err != nil {
		return nil, nil, err
	}
	return ParseWithFiles(filepath.Base(path), data, os.DirFS(filepath.Dir(path)))
}

// Parse parses spec bytes; name is the file name used in positions (only its
// base name is kept); weights are read from fsys, rooted at the spec's
// directory. The error, if any, is an ErrorList.
func Parse(name string, data []byte, fsys fs.FS) (*ir.Graph, error) {
	g, _, err := ParseWithFiles(name, data, fsys)
	return g, err
}

// ParseWithFiles is Parse that also returns the files the spec reads, for
// hashing and staleness checks: the spec's base name first, then each weight
// file the spec names, as a slash-separated path relative to the spec's
// directory, in order of first mention. The list is returned even when the
// spec has errors; it then holds the weight files named so far.
func ParseWithFiles(name string, data []byte, fsys fs.FS) (g *ir.Graph, files []string, err error) {
	file := name
	if file != "" {
		file = filepath.Base(name)
	}
	p := &parser{file: file, fsys: fsys, seen: map[string]bool{}}
	files = []string{file}
	defer func() {
		// Nothing below should panic; if something does, report it as an
		// error in the spec rather than take the caller down.
		if r := recover(); r != nil {
			g = nil
			err = ErrorList{{Pos: ir.Pos{File: file, Line: 1}, Msg: fmt.Sprintf("internal error reading the spec (please report it): %v", r)}}
		}
	}()
	g = p.parse(data)
	files = append(files, p.files...)
	if len(p.errs) > 0 {
		p.errs.sort()
		if len(p.errs) > maxErrors {
			more := &Error{Pos: p.errs[maxErrors].Pos, Msg: fmt.Sprintf("%d more problems not shown", len(p.errs)-maxErrors)}
			p.errs = append(p.errs[:maxErrors:maxErrors], more)
		}
		return nil, files, p.errs
	}
	return g, files, nil
}

// yamlLine matches the position yaml.v3 puts in its syntax errors.
var yamlLine = regexp.MustCompile(`^yaml: line (\d+): `)

// parse decodes the YAML document and walks it.
func (p *parser) parse(data []byte) *ir.Graph {
	top := ir.Pos{File: p.file, Line: 1}
	if len(data) > MaxSpecBytes {
		p.errs = append(p.errs, &Error{top, fmt.Sprintf("spec file is larger than the %d MiB limit", MaxSpecBytes>>20)})
		return nil
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	var doc yaml.Node
	if err := decodeYAML(dec, &doc); err != nil {
		if errors.Is(err, io.EOF) {
			p.errs = append(p.errs, &Error{top, "spec is empty; it must start with \"lanthorn: 1\""})
		} else {
			p.syntaxError(err, data)
		}
		return nil
	}
	var extra yaml.Node
	if err := decodeYAML(dec, &extra); err == nil {
		p.errorf(&extra, "a spec is a single YAML document; found a second one (remove the \"---\")")
	} else if !errors.Is(err, io.EOF) {
		p.syntaxError(err, data)
	}
	root := &doc
	if root.Kind == yaml.DocumentNode {
		if len(root.Content) == 0 {
			p.errs = append(p.errs, &Error{top, "spec is empty; it must start with \"lanthorn: 1\""})
			return nil
		}
		root = root.Content[0]
	}
	p.budget = 2*countNodes(root, 0) + 1<<20
	return p.spec(root)
}

// decodeYAML decodes the next document, turning a panic inside yaml.v3
// into an error.
func decodeYAML(dec *yaml.Decoder, n *yaml.Node) (err error) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("yaml: cannot parse the file: %v", r)
		}
	}()
	return dec.Decode(n)
}

// unknownAnchor matches the one yaml.v3 error that names no line.
var unknownAnchor = regexp.MustCompile(`^yaml: unknown anchor '(.*)' referenced$`)

// syntaxError reports an error of the YAML parser at the line it names.
// yaml.v3 leaves the line out on the first line, and for an unknown anchor;
// that one is found in the text.
func (p *parser) syntaxError(err error, data []byte) {
	msg := err.Error()
	pos := ir.Pos{File: p.file, Line: 1}
	if m := yamlLine.FindStringSubmatch(msg); m != nil {
		if n, err := strconv.Atoi(m[1]); err == nil {
			pos.Line = n
		}
		msg = msg[len(m[0]):]
	} else {
		if m := unknownAnchor.FindStringSubmatch(msg); m != nil {
			if i := bytes.Index(data, []byte("*"+m[1])); i >= 0 {
				pos.Line = 1 + bytes.Count(data[:i], []byte("\n"))
				pos.Col = 1 + utf8.RuneCount(data[bytes.LastIndexByte(data[:i], '\n')+1:i])
			}
		}
		msg = strings.TrimPrefix(msg, "yaml: ")
	}
	p.errs = append(p.errs, &Error{pos, "YAML syntax error: " + msg})
}

// countNodes counts the nodes of the tree at n, not following aliases.
func countNodes(n *yaml.Node, depth int) int {
	if n == nil || depth > 1<<14 {
		return 0
	}
	c := 1
	for _, k := range n.Content {
		c += countNodes(k, depth+1)
	}
	return c
}
