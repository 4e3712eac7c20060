package npy

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// manifest is testdata/manifest.json, written by scripts/make_kernel_fixtures.py with
// NumPy 1.24 (Debian 12) beside the .npy files it saved.
type manifest struct {
	Files []struct {
		File         string    `json:"file"`
		Descr        string    `json:"descr"`
		FortranOrder bool      `json:"fortran_order"`
		Version      []int     `json:"version"`
		Shape        []int     `json:"shape"`
		Values       []float64 `json:"values"`
	} `json:"files"`
}

func loadManifest(t *testing.T) *manifest {
	t.Helper()
	b, err := os.ReadFile("testdata/manifest.json")
	if err != nil {
		t.Fatal(err)
	}
	var m manifest
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	if len(m.Files) < 50 {
		t.Fatalf("manifest lists only %d files", len(m.Files))
	}
	return &m
}

// TestReadNumPyFiles reads every file numpy.save (and numpy.lib.format.write_array for
// versions 2.0 and 3.0) wrote, in each dtype, byte order and memory order we support,
// and checks the values in C order exactly.
// expected: NumPy 1.24 (Debian 12), testdata/manifest.json.
func TestReadNumPyFiles(t *testing.T) {
	m := loadManifest(t)
	for _, f := range m.Files {
		t.Run(f.File, func(t *testing.T) {
			path := filepath.Join("testdata", f.File)
			a, err := ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			b, err := os.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			a2, err := Read(bytes.NewReader(b))
			if err != nil {
				t.Fatalf("Read: %v", err)
			}
			h, err := ReadHeader(bytes.NewReader(b))
			if err != nil {
				t.Fatal(err)
			}
			if h.Descr != f.Descr || h.FortranOrder != f.FortranOrder || h.Major != f.Version[0] {
				t.Errorf("header %s %v v%d, want %s %v v%d", h.Descr, h.FortranOrder, h.Major,
					f.Descr, f.FortranOrder, f.Version[0])
			}
			// NEP 1: the data start on a 64-byte boundary in files NumPy 1.24 writes.
			if h.DataOffset%64 != 0 {
				t.Errorf("data offset %d not 64-aligned", h.DataOffset)
			}
			for _, got := range []*Array{a, a2} {
				if !slices.Equal(got.Shape, f.Shape) {
					t.Fatalf("shape %v, want %v", got.Shape, f.Shape)
				}
				if !slices.Equal(got.Data, f.Values) {
					t.Errorf("values %v, want %v", got.Data, f.Values)
				}
			}
		})
	}
}

// TestWriteMatchesNumPy: our writer produces the very bytes numpy.save writes for the
// same array, header padding included, so NumPy loads it as its own.
// expected: numpy.save, NumPy 1.24 (Debian 12), testdata/golden_*.npy.
func TestWriteMatchesNumPy(t *testing.T) {
	for _, tc := range []struct {
		file  string
		shape []int
		f32   bool
	}{
		{"golden_f8_2x3x4.npy", []int{2, 3, 4}, false},
		{"golden_f4_2x3x4.npy", []int{2, 3, 4}, true},
		{"golden_f8_7.npy", []int{7}, false},
		{"golden_f8_11x11x11.npy", []int{11, 11, 11}, false},
	} {
		t.Run(tc.file, func(t *testing.T) {
			want, err := os.ReadFile(filepath.Join("testdata", tc.file))
			if err != nil {
				t.Fatal(err)
			}
			a := &Array{Shape: tc.shape}
			a.Data = make([]float64, a.Len())
			for i := range a.Data {
				a.Data[i] = float64(i)*0.25 - 3 // the script's values
			}
			var buf bytes.Buffer
			if tc.f32 {
				err = WriteFloat32(&buf, a)
			} else {
				err = Write(&buf, a)
			}
			if err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(buf.Bytes(), want) {
				n := min(buf.Len(), len(want), 128)
				t.Errorf("bytes differ from numpy.save:\n got %q\nwant %q", buf.Bytes()[:n], want[:n])
			}
		})
	}
}

// TestHeaderAlignment: NEP 1 requires the data to start on a 64-byte boundary (NumPy
// 1.24's ARRAY_ALIGN) and the header to end with '\n', for any shape.
func TestHeaderAlignment(t *testing.T) {
	for _, shape := range [][]int{{}, {1}, {0}, {3, 0}, {123456789}, {1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12}} {
		h := header("<f8", shape)
		if len(h)%64 != 0 || h[len(h)-1] != '\n' {
			t.Errorf("shape %v: header length %d, ends %q", shape, len(h), h[len(h)-1:])
		}
		hl := int(binary.LittleEndian.Uint16([]byte(h[8:10])))
		if hl+10 != len(h) {
			t.Errorf("shape %v: stored header length %d, actual %d", shape, hl, len(h)-10)
		}
		rh, err := ReadHeader(strings.NewReader(h))
		if err != nil {
			t.Fatalf("shape %v: %v", shape, err)
		}
		if !slices.Equal(rh.Shape, shape) && !(len(shape) == 0 && len(rh.Shape) == 0) {
			t.Errorf("shape %v read back as %v", shape, rh.Shape)
		}
	}
}

func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	for _, shape := range [][]int{{}, {5}, {3, 4}, {2, 3, 4}, {1, 1, 9}, {0, 2}} {
		a := &Array{Shape: shape}
		a.Data = make([]float64, a.Len())
		for i := range a.Data {
			a.Data[i] = rng.NormFloat64() * 1e3
		}
		for _, f32 := range []bool{false, true} {
			var buf bytes.Buffer
			if err := write(&buf, a, f32); err != nil {
				t.Fatal(err)
			}
			b, err := Read(&buf)
			if err != nil {
				t.Fatal(err)
			}
			want := a.Data
			if f32 {
				want = make([]float64, len(a.Data))
				for i, v := range a.Data {
					want[i] = float64(float32(v))
				}
			}
			if len(b.Shape) != len(shape) || !slices.Equal(b.Data, want) {
				t.Errorf("shape %v f32 %v: got %v %v", shape, f32, b.Shape, b.Data)
			}
		}
	}
}

func TestWriteRejectsMismatch(t *testing.T) {
	err := Write(&bytes.Buffer{}, &Array{Shape: []int{2, 3}, Data: make([]float64, 5)})
	if err == nil {
		t.Error("no error for 5 values in a 2×3 shape")
	}
}

// v1 builds a version 1.0 file from a header dict and data bytes, padded as NumPy pads.
func v1(dict string, data []byte) []byte {
	pad := 64 - (10+len(dict)+1)%64
	h := dict + strings.Repeat(" ", pad) + "\n"
	b := append([]byte(Magic), 1, 0)
	b = binary.LittleEndian.AppendUint16(b, uint16(len(h)))
	b = append(b, h...)
	return append(b, data...)
}

func TestMalformed(t *testing.T) {
	f8 := func(n int) []byte { return make([]byte, 8*n) }
	for _, tc := range []struct {
		name        string
		file        []byte
		unsupported bool
	}{
		{"empty", nil, false},
		{"bad magic", []byte("\x93NUMPZ\x01\x00\x10\x00{}"), false},
		{"short header", []byte(Magic + "\x01\x00\x40\x00{'descr'"), false},
		{"version 4", []byte(Magic + "\x04\x00\x10\x00"), true},
		{"version 1.1", append([]byte(Magic+"\x01\x01"), v1("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), }", f8(1))[8:]...), true},
		{"no newline", append([]byte(Magic+"\x01\x00\x05\x00"), "{}   "...), false},
		{"missing shape", v1("{'descr': '<f8', 'fortran_order': False, }", f8(1)), false},
		{"extra key", v1("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), 'x': 1, }", f8(1)), false},
		{"repeated key", v1("{'descr': '<f8', 'descr': '<f8', 'fortran_order': False, 'shape': (1,), }", f8(1)), false},
		{"negative dim", v1("{'descr': '<f8', 'fortran_order': False, 'shape': (-1,), }", f8(1)), false},
		{"shape not ints", v1("{'descr': '<f8', 'fortran_order': False, 'shape': ('a',), }", f8(1)), false},
		{"fortran not bool", v1("{'descr': '<f8', 'fortran_order': 0, 'shape': (1,), }", f8(1)), false},
		{"overflowing shape", v1("{'descr': '<f8', 'fortran_order': False, 'shape': (4294967296, 4294967296, 4294967296), }", f8(1)), false},
		{"truncated data", v1("{'descr': '<f8', 'fortran_order': False, 'shape': (3, 3), }", f8(8)), false},
		{"huge claim", v1("{'descr': '<f8', 'fortran_order': False, 'shape': (1000000000000,), }", f8(4)), false},
		{"complex", v1("{'descr': '<c16', 'fortran_order': False, 'shape': (1,), }", make([]byte, 16)), true},
		{"float128", v1("{'descr': '<f16', 'fortran_order': False, 'shape': (1,), }", make([]byte, 16)), true},
		{"structured", v1("{'descr': [('a', '<f4'), ('b', '<i4')], 'fortran_order': False, 'shape': (1,), }", f8(1)), true},
		{"object", v1("{'descr': '|O', 'fortran_order': False, 'shape': (1,), }", f8(1)), true},
		{"pipe with size 8", v1("{'descr': '|f8', 'fortran_order': False, 'shape': (1,), }", f8(1)), false},
		{"garbage after dict", v1("{'descr': '<f8', 'fortran_order': False, 'shape': (1,), } x", f8(1)), false},
		{"unterminated string", v1("{'descr: '<f8'", nil), false},
		{"deep nesting", v1("{'descr': "+strings.Repeat("[", 100)+", }", nil), false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Read(bytes.NewReader(tc.file))
			if err == nil {
				t.Fatal("no error")
			}
			if !strings.HasPrefix(err.Error(), "npy: ") {
				t.Errorf("error %q lacks the npy: prefix", err)
			}
			var fe FormatError
			var ue UnsupportedError
			switch {
			case tc.unsupported && !errors.As(err, &ue):
				t.Errorf("want UnsupportedError, got %T %v", err, err)
			case !tc.unsupported && !errors.As(err, &fe):
				t.Errorf("want FormatError, got %T %v", err, err)
			}
		})
	}
}

// TestReadFileChecksSize: a header claiming more data than the file holds is refused
// before the data are read, naming the sizes.
func TestReadFileChecksSize(t *testing.T) {
	p := filepath.Join(t.TempDir(), "k.npy")
	b := v1("{'descr': '<f4', 'fortran_order': False, 'shape': (100000, 100000, 1000), }", make([]byte, 40))
	if err := os.WriteFile(p, b, 0o644); err != nil {
		t.Fatal(err)
	}
	_, err := ReadFile(p)
	if err == nil || !strings.Contains(err.Error(), "file has 40") {
		t.Errorf("got %v, want a size error", err)
	}
}

// TestHalf checks float16 decoding on the format's landmarks (IEEE 754-2008 binary16):
// 1, −2, the largest finite 65504, the smallest subnormal 2⁻²⁴, infinities and NaN.
func TestHalf(t *testing.T) {
	for _, tc := range []struct {
		bits uint16
		want float64
	}{
		{0x3c00, 1}, {0xc000, -2}, {0x7bff, 65504}, {0x0001, math.Ldexp(1, -24)},
		{0x0000, 0}, {0x3555, 0.333251953125}, {0x7c00, math.Inf(1)}, {0xfc00, math.Inf(-1)},
	} {
		if got := halfToFloat64(tc.bits); got != tc.want {
			t.Errorf("%#04x: %v, want %v", tc.bits, got, tc.want)
		}
	}
	if !math.IsNaN(halfToFloat64(0x7e00)) {
		t.Error("0x7e00 is not NaN")
	}
}

// TestPython2Header: files written by NumPy under Python 2 spell shapes with long
// integers, (3L, 4L) (numpy.lib.format accepts them on reading).
func TestPython2Header(t *testing.T) {
	a, err := Read(bytes.NewReader(v1("{'descr': '<f8', 'fortran_order': False, 'shape': (1L, 2L), }", make([]byte, 16))))
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a.Shape, []int{1, 2}) {
		t.Errorf("shape %v", a.Shape)
	}
}

const python = "/usr/bin/python3"

// TestLiveNumPy cross-checks with the system NumPy when it is installed (Debian's
// python3-numpy): NumPy loads files we write, and we read random arrays NumPy saves in
// random dtypes, memory orders and versions. It skips without /usr/bin/python3 or
// with -short.
func TestLiveNumPy(t *testing.T) {
	if testing.Short() {
		t.Skip("-short")
	}
	if _, err := os.Stat(python); err != nil {
		t.Skip("no " + python)
	}
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(7, 3))
	// Ours → NumPy.
	var cases []string
	for i := range 6 {
		shape := make([]int, rng.IntN(4))
		for j := range shape {
			shape[j] = 1 + rng.IntN(6)
		}
		a := &Array{Shape: shape}
		a.Data = make([]float64, a.Len())
		for j := range a.Data {
			a.Data[j] = rng.NormFloat64()
		}
		f32 := i%2 == 1
		name := filepath.Join(dir, fmt.Sprintf("ours%d.npy", i))
		var buf bytes.Buffer
		if err := write(&buf, a, f32); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(name, buf.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
		want := a.Data
		if f32 {
			want = make([]float64, len(a.Data))
			for j, v := range a.Data {
				want[j] = float64(float32(v))
			}
		}
		js, _ := json.Marshal(map[string]any{"file": name, "shape": shape, "values": want})
		cases = append(cases, string(js))
	}
	script := `
import json, sys, numpy as np
for line in sys.stdin:
    c = json.loads(line)
    a = np.load(c["file"])
    assert a.flags["C_CONTIGUOUS"]
    assert list(a.shape) == c["shape"], (a.shape, c["shape"])
    assert [float(v) for v in a.ravel()] == c["values"], c["file"]
print("ok")
`
	cmd := exec.Command(python, "-c", script)
	cmd.Stdin = strings.NewReader(strings.Join(cases, "\n") + "\n")
	out, err := cmd.CombinedOutput()
	if strings.Contains(string(out), "ModuleNotFoundError") {
		t.Skip("no numpy for " + python)
	}
	if err != nil || !strings.Contains(string(out), "ok") {
		t.Fatalf("numpy.load of our files: %v\n%s", err, out)
	}
	// NumPy → ours.
	script = `
import json, sys, numpy as np
rng = np.random.default_rng(11)
out = []
d = sys.argv[1]
for i, descr in enumerate(["<f8", ">f8", "<f4", ">f4", "<i2", ">u4", "|i1", "<i8"]):
    shape = tuple(int(n) for n in rng.integers(1, 6, size=rng.integers(1, 4)))
    a = (rng.standard_normal(shape) * 50).astype(descr)
    order = "F" if i % 2 else "C"
    a = a.copy(order=order)
    name = "%s/np%d.npy" % (d, i)
    version = [(1, 0), (2, 0), (3, 0)][i % 3]
    with open(name, "wb") as f:
        np.lib.format.write_array(f, a, version=version)
    out.append({"file": name, "shape": list(shape), "values": [float(v) for v in a.ravel(order="C")]})
print(json.dumps(out))
`
	out, err = exec.Command(python, "-c", script, dir).Output()
	if err != nil {
		t.Fatalf("numpy: %v", err)
	}
	var theirs []struct {
		File   string    `json:"file"`
		Shape  []int     `json:"shape"`
		Values []float64 `json:"values"`
	}
	if err := json.Unmarshal(out, &theirs); err != nil {
		t.Fatal(err)
	}
	for _, c := range theirs {
		a, err := ReadFile(c.File)
		if err != nil {
			t.Fatalf("%s: %v", c.File, err)
		}
		if !slices.Equal(a.Shape, c.Shape) || !slices.Equal(a.Data, c.Values) {
			t.Errorf("%s: got %v %v, numpy says %v %v", c.File, a.Shape, a.Data, c.Shape, c.Values)
		}
	}
}

func BenchmarkRead(b *testing.B) {
	a := &Array{Shape: []int{31, 31, 31}}
	a.Data = make([]float64, a.Len())
	var buf bytes.Buffer
	if err := Write(&buf, a); err != nil {
		b.Fatal(err)
	}
	data := buf.Bytes()
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Read(bytes.NewReader(data)); err != nil {
			b.Fatal(err)
		}
	}
}

func ExampleWrite() {
	var buf bytes.Buffer
	a := &Array{Shape: []int{1, 1, 3}, Data: []float64{0.25, 0.5, 0.25}}
	if err := Write(&buf, a); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("%q\n", buf.Bytes()[:72])
	b, _ := Read(&buf)
	fmt.Println(b.Shape, b.Data, math.Abs(b.Data[1]-0.5) == 0)
	// Output:
	// "\x93NUMPY\x01\x00v\x00{'descr': '<f8', 'fortran_order': False, 'shape': (1, 1, 3), }"
	// [1 1 3] [0.25 0.5 0.25] true
}
