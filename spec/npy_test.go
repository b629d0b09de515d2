package spec

import (
	"bytes"
	"encoding/binary"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

// npyV1F8 is a .npy file written out by hand from the format description in
// NumPy's numpy.lib.format documentation (NEP 1, "A simple file format for
// NumPy arrays"): the magic string "\x93NUMPY", major version 1, minor 0, a
// little-endian uint16 header length, then the header, a Python dict literal
// with 'descr', 'fortran_order' and 'shape', padded with spaces and ended by
// '\n' so that magic + version + length + header fill a multiple of 64
// bytes, then the data in C order. The array is [[1, 2, 3], [4, 5, -0.5]] of
// '<f8'. The layout is written from that description as remembered; the
// bytes were then checked once to equal np.save's output in NumPy 1.24.2.
var npyV1F8 = "\x93NUMPY" + // magic
	"\x01\x00" + // version 1.0
	"\x76\x00" + // header length 118: 10 + 118 = 128 = 2 × 64
	"{'descr': '<f8', 'fortran_order': False, 'shape': (2, 3), }" + // 59 bytes
	strings.Repeat(" ", 58) + "\n" + // padding to 118
	"\x00\x00\x00\x00\x00\x00\xf0\x3f" + // 1.0  = 0x3FF0000000000000 (IEEE 754 binary64, little-endian)
	"\x00\x00\x00\x00\x00\x00\x00\x40" + // 2.0  = 0x4000000000000000
	"\x00\x00\x00\x00\x00\x00\x08\x40" + // 3.0  = 0x4008000000000000
	"\x00\x00\x00\x00\x00\x00\x10\x40" + // 4.0  = 0x4010000000000000
	"\x00\x00\x00\x00\x00\x00\x14\x40" + // 5.0  = 0x4014000000000000
	"\x00\x00\x00\x00\x00\x00\xe0\xbf" // -0.5 = 0xBFE0000000000000

// npyV1I4Fortran is written by hand the same way, with the 16-byte
// alignment older NumPy versions used (the format description allows
// either): [[1, 2, 3], [4, 5, 6]] of '<i4' stored in Fortran order, so the
// data runs down the columns: 1 4 2 5 3 6.
var npyV1I4Fortran = "\x93NUMPY\x01\x00" +
	"\x46\x00" + // header length 70: 10 + 70 = 80 = 5 × 16
	"{'descr': '<i4', 'fortran_order': True, 'shape': (2, 3), }" + // 58 bytes
	strings.Repeat(" ", 11) + "\n" +
	"\x01\x00\x00\x00\x04\x00\x00\x00" +
	"\x02\x00\x00\x00\x05\x00\x00\x00" +
	"\x03\x00\x00\x00\x06\x00\x00\x00"

func TestReadNPYWorkedExamples(t *testing.T) {
	if len(npyV1F8)-8*6 != 128 || len(npyV1I4Fortran)-4*6 != 80 {
		t.Fatalf("worked examples mis-sized: headers end at %d and %d", len(npyV1F8)-48, len(npyV1I4Fortran)-24)
	}
	for _, tc := range []struct {
		name  string
		file  string
		data  []float64
		shape []int
	}{
		{"v1.0 <f8 C order, 64-aligned", npyV1F8, []float64{1, 2, 3, 4, 5, -0.5}, []int{2, 3}},
		{"v1.0 <i4 Fortran order, 16-aligned", npyV1I4Fortran, []float64{1, 2, 3, 4, 5, 6}, []int{2, 3}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			data, shape, err := ReadNPY(strings.NewReader(tc.file))
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(data, tc.data) || !reflect.DeepEqual(shape, tc.shape) {
				t.Errorf("got %v shape %v, want %v shape %v", data, shape, tc.data, tc.shape)
			}
		})
	}
}

// WriteNPY follows NumPy's padding rule, so it writes the worked example
// byte for byte.
func TestWriteNPYWorkedExample(t *testing.T) {
	var b bytes.Buffer
	if err := WriteNPY(&b, []float64{1, 2, 3, 4, 5, -0.5}, []int{2, 3}); err != nil {
		t.Fatal(err)
	}
	if b.String() != npyV1F8 {
		t.Errorf("WriteNPY bytes differ from the worked example:\n got %q\nwant %q", b.String(), npyV1F8)
	}
}

// Files written by NumPy itself: see testdata/numpy/README.md.
func TestReadNPYFromNumPy(t *testing.T) {
	for _, tc := range []struct {
		file  string
		data  []float64
		shape []int
		err   string
	}{
		{file: "f4.npy", data: []float64{1.5, -2, 0.25}, shape: []int{3}},
		{file: "scalar.npy", data: []float64{3.25}, shape: []int{}},
		{file: "u1.npy", data: []float64{0, 255, 7}, shape: []int{3}},
		{file: "b1.npy", data: []float64{1, 0}, shape: []int{2}},
		{file: "i8.npy", data: []float64{-3, 1 << 40}, shape: []int{2, 1}},
		{file: "v2.npy", data: []float64{0, 1, 2, 3, 4, 5}, shape: []int{2, 3}},
		{file: "v3.npy", data: []float64{0, 1, 2, 3, 4, 5}, shape: []int{2, 3}},
		{file: "f3.npy", data: seq(24), shape: []int{2, 3, 4}},
		{file: "big.npy", err: "big-endian .npy dtype '>f8' is not supported"},
	} {
		t.Run(tc.file, func(t *testing.T) {
			raw, err := os.ReadFile(filepath.Join("testdata", "numpy", tc.file))
			if err != nil {
				t.Fatal(err)
			}
			data, shape, err := ReadNPY(bytes.NewReader(raw))
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) {
					t.Fatalf("error %v, want one containing %q", err, tc.err)
				}
				return
			}
			if err != nil {
				t.Fatal(err)
			}
			if !reflect.DeepEqual(data, tc.data) || !reflect.DeepEqual(shape, tc.shape) {
				t.Errorf("got %v shape %v, want %v shape %v", data, shape, tc.data, tc.shape)
			}
		})
	}
}

func seq(n int) []float64 {
	s := make([]float64, n)
	for i := range s {
		s[i] = float64(i)
	}
	return s
}

func TestNPYRoundTrip(t *testing.T) {
	for _, tc := range []struct {
		data  []float64
		shape []int
	}{
		{[]float64{math.Pi}, []int{}},
		{[]float64{}, []int{0}},
		{[]float64{1, -2, 3.5, math.MaxFloat64, math.SmallestNonzeroFloat64}, []int{5}},
		{seq(12), []int{3, 4}},
		{[]float64{7}, []int{1, 1}},
		{seq(30), []int{2, 3, 5}},
		{seq(10000), []int{100, 100}}, // more than one write chunk
	} {
		var b bytes.Buffer
		if err := WriteNPY(&b, tc.data, tc.shape); err != nil {
			t.Fatal(err)
		}
		hlen := int(binary.LittleEndian.Uint16(b.Bytes()[8:10]))
		if (10+hlen)%64 != 0 || b.Bytes()[10+hlen-1] != '\n' {
			t.Errorf("shape %v: header of %d bytes is not padded to 64 with a final newline", tc.shape, hlen)
		}
		data, shape, err := ReadNPY(&b)
		if err != nil {
			t.Fatalf("shape %v: %v", tc.shape, err)
		}
		if !reflect.DeepEqual(data, tc.data) || !reflect.DeepEqual(shape, tc.shape) {
			t.Errorf("round trip of shape %v: got shape %v", tc.shape, shape)
		}
	}
}

func TestWriteNPYErrors(t *testing.T) {
	var b bytes.Buffer
	if err := WriteNPY(&b, []float64{1, 2, 3}, []int{2, 2}); err == nil {
		t.Error("no error for 3 elements of shape [2 2]")
	}
	if err := WriteNPY(&b, nil, []int{-1}); err == nil {
		t.Error("no error for a negative dimension")
	}
}

// npyFile builds a .npy file of version 1.0 with the given header dict and
// data bytes.
func npyFile(dict string, data string) string {
	h := dict + "\n"
	return "\x93NUMPY\x01\x00" + string([]byte{byte(len(h)), byte(len(h) >> 8)}) + h + data
}

func TestReadNPYErrors(t *testing.T) {
	f8 := func(xs ...float64) string {
		var b []byte
		for _, x := range xs {
			b = binary.LittleEndian.AppendUint64(b, math.Float64bits(x))
		}
		return string(b)
	}
	for _, tc := range []struct {
		name, file, err string
	}{
		{"empty", "", "not a .npy file: only 0 bytes long"},
		{"bad magic", "\x93NUMPZ\x01\x00\x00\x00", `not a .npy file: it does not start with "\x93NUMPY"`},
		{"version 4.0", "\x93NUMPY\x04\x00\x00\x00", "unsupported .npy format version 4.0"},
		{"version 1.1", "\x93NUMPY\x01\x01\x00\x00", "unsupported .npy format version 1.1"},
		{"truncated length", "\x93NUMPY\x01\x00\x10", "it ends inside the header length"},
		{"truncated header", "\x93NUMPY\x01\x00\x10\x00{'de", "it ends inside the header"},
		{"huge v2 header", "\x93NUMPY\x02\x00\xff\xff\xff\xff", "header is 4294967295 bytes long"},
		{"big-endian", npyFile("{'descr': '>f8', 'fortran_order': False, 'shape': (1,), }", f8(1)), "big-endian .npy dtype '>f8' is not supported"},
		{"complex", npyFile("{'descr': '<c16', 'fortran_order': False, 'shape': (1,), }", ""), "unsupported .npy dtype \"<c16\""},
		{"object", npyFile("{'descr': '|O', 'fortran_order': False, 'shape': (1,), }", ""), "unsupported .npy dtype"},
		{"pipe on f8", npyFile("{'descr': '|f8', 'fortran_order': False, 'shape': (1,), }", f8(1)), "'|' (no byte order) is only for one-byte types"},
		{"structured", npyFile("{'descr': [('a', '<f8')], 'fortran_order': False, 'shape': (1,), }", f8(1)), "structured arrays are not supported"},
		{"short data", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (3,), }", f8(1, 2)), ".npy data is 16 bytes, shorter than the 24 bytes its shape (3,) of <f8 needs"},
		{"long data", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), }", f8(1, 2)), ".npy data is longer than the 8 bytes its shape (1,) of <f8 needs"},
		{"missing shape", npyFile("{'descr': '<f8', 'fortran_order': False}", f8(1)), "missing key 'shape'"},
		{"extra key", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), 'x': 1}", f8(1)), "unexpected key \"x\""},
		{"duplicate key", npyFile("{'descr': '<f8', 'descr': '<f8', 'fortran_order': False, 'shape': (1,)}", f8(1)), "duplicate key \"descr\""},
		{"negative dim", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (-1,), }", ""), "'shape' is not a tuple of non-negative integers"},
		{"shape not tuple", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': 3, }", ""), "'shape' is not a tuple"},
		{"parenthesized int", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (3), }", ""), "'shape' is not a tuple"},
		{"fortran not bool", npyFile("{'descr': '<f8', 'fortran_order': 0, 'shape': (1,), }", f8(1)), "'fortran_order' is not True or False"},
		{"not a dict", npyFile("['descr']", ""), "not a dictionary"},
		{"garbage", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), } x", f8(1)), `unexpected "x`},
		{"unterminated", npyFile("{'descr: '<f8'}", ""), "header:"},
		{"too many elements", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (5000, 5000), }", ""), "has more than 16777216 elements"},
		{"overflowing shape", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (4294967296, 4294967296, 4294967296), }", ""), "has more than 16777216 elements"},
		{"huge dimension", npyFile("{'descr': '<f8', 'fortran_order': False, 'shape': (99999999999999999999999,), }", ""), "bad integer"},
		{"deep nesting", npyFile("{'descr': "+strings.Repeat("(", 100)+"}", ""), "nested too deeply"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, _, err := ReadNPY(strings.NewReader(tc.file))
			if err == nil || !strings.Contains(err.Error(), tc.err) {
				t.Errorf("error %v, want one containing %q", err, tc.err)
			}
		})
	}
}

func TestReadNPYByteOrderMarks(t *testing.T) {
	for _, descr := range []string{"=f8", "<f8"} {
		file := npyFile("{'descr': '"+descr+"', 'fortran_order': False, 'shape': (1,), }", "\x00\x00\x00\x00\x00\x00\xf0\x3f")
		data, _, err := ReadNPY(strings.NewReader(file))
		if err != nil || len(data) != 1 || data[0] != 1 {
			t.Errorf("%s: got %v, %v", descr, data, err)
		}
	}
	// Python 2 wrote shapes with long integers: (2L,).
	file := npyFile("{'descr': '|i1', 'fortran_order': False, 'shape': (2L,), }", "\xff\x01")
	data, shape, err := ReadNPY(strings.NewReader(file))
	if err != nil || !reflect.DeepEqual(data, []float64{-1, 1}) || !reflect.DeepEqual(shape, []int{2}) {
		t.Errorf("|i1 (2L,): got %v %v, %v", data, shape, err)
	}
}

func FuzzReadNPY(f *testing.F) {
	f.Add([]byte(npyV1F8))
	f.Add([]byte(npyV1I4Fortran))
	f.Add([]byte(npyFile("{'descr': '<f4', 'fortran_order': True, 'shape': (2, 1, 1), }", "\x00\x00\x80\x3f\x00\x00\x80\x3f")))
	f.Fuzz(func(t *testing.T, b []byte) {
		data, shape, err := ReadNPY(bytes.NewReader(b))
		if err != nil {
			return
		}
		n := 1
		for _, d := range shape {
			n *= d
		}
		if n != len(data) {
			t.Fatalf("shape %v but %d elements", shape, len(data))
		}
	})
}
