package kerneltext

import (
	"bytes"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"slices"
	"strings"
	"testing"
)

func TestReadFiles(t *testing.T) {
	for _, tc := range []struct {
		file  string
		shape []int
		data  []float64
	}{
		// expected: the 7-point Laplacian stencil (common practice), laid out by hand.
		{"laplace7.txt", []int{3, 3, 3}, []float64{
			0, 0, 0, 0, 1, 0, 0, 0, 0,
			0, 1, 0, 1, -6, 1, 0, 1, 0,
			0, 0, 0, 0, 1, 0, 0, 0, 0}},
		{"row_commas.txt", []int{1, 1, 3}, []float64{0.25, 0.5, 0.25}},
		{"slice_tabs_crlf.txt", []int{1, 3, 3}, []float64{1, 2, 1, 2, 4, 2, 1, 2, 1}},
		{"comments_blanks.txt", []int{2, 2, 3}, []float64{1e-3, 250, 0, 4, 5, 6, 7, 8, 9, 1, 0.5, 3}},
	} {
		t.Run(tc.file, func(t *testing.T) {
			f, err := os.Open("testdata/" + tc.file)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			a, err := Read(f)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(a.Shape, tc.shape) || !slices.Equal(a.Data, tc.data) {
				t.Errorf("got %v %v, want %v %v", a.Shape, a.Data, tc.shape, tc.data)
			}
		})
	}
}

func TestRoundTrip(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for _, shape := range [][]int{{5}, {3, 4}, {2, 3, 4}, {1, 1, 1}, {7, 1, 2}} {
		a := &Array{Shape: shape}
		n := 1
		for _, d := range shape {
			n *= d
		}
		a.Data = make([]float64, n)
		for i := range a.Data {
			a.Data[i] = rng.NormFloat64() * []float64{1, 1e-30, 1e30, 3}[i%4]
		}
		var buf bytes.Buffer
		if err := Write(&buf, a); err != nil {
			t.Fatal(err)
		}
		if !strings.HasPrefix(buf.String(), "# kernel of ") {
			t.Errorf("no shape comment: %q", buf.String()[:20])
		}
		b, err := Read(&buf)
		if err != nil {
			t.Fatal(err)
		}
		want := []int{1, 1, 1}
		copy(want[3-len(shape):], shape)
		if !slices.Equal(b.Shape, want) || !slices.Equal(b.Data, a.Data) {
			t.Errorf("shape %v: read back %v %v", shape, b.Shape, b.Data)
		}
	}
}

func TestMalformed(t *testing.T) {
	long := strings.Repeat("1 ", MaxAxis+1)
	for _, tc := range []struct {
		name, text string
		line       int
		msg        string
	}{
		{"empty", "", 0, "no values"},
		{"only comments", "# nothing\n\n# here\n", 0, "no values"},
		{"short row", "1 2 3\n4 5\n", 2, "row has 2 values, the first row (line 1) has 3"},
		{"short row in slice 2", "1 2\n3 4\n\n5 6\n7\n", 5, "row has 1 values"},
		{"short slice", "1 2\n3 4\n\n5 6\n", 4, "z-slice 2 has 1 rows, the first slice has 2"},
		{"long slice", "1\n\n2\n3\n", 3, "z-slice 2 has 2 rows"},
		{"not a number", "1 2 x3\n", 1, `"x3" is not a number`},
		{"NaN", "1 NaN\n", 1, "not a finite number"},
		{"Inf", "\n\n-Inf 1\n", 3, "not a finite number"},
		{"empty between commas", "1,,2\n", 1, "empty value between commas"},
		{"too long a row", long + "\n", 1, "longer than the limit"},
		{"too many rows", strings.Repeat("1\n", MaxAxis+1), MaxAxis + 1, "more than 1023 rows"},
		{"too many slices", strings.Repeat("1\n\n", MaxAxis+1), 2*MaxAxis + 2, "more than 1023 z-slices"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Read(strings.NewReader(tc.text))
			var fe *FormatError
			if !errors.As(err, &fe) {
				t.Fatalf("got %v, want a FormatError", err)
			}
			if fe.Line != tc.line || !strings.Contains(fe.Msg, tc.msg) {
				t.Errorf("got line %d %q, want line %d containing %q", fe.Line, fe.Msg, tc.line, tc.msg)
			}
			if !strings.HasPrefix(err.Error(), "kerneltext: ") {
				t.Errorf("error %q lacks the prefix", err)
			}
		})
	}
}

// TestTapLimit: a text with more than MaxTaps values is refused as it is read.
func TestTapLimit(t *testing.T) {
	if testing.Short() {
		t.Skip("builds 34 MB of text")
	}
	row := strings.Repeat("0 ", 1000) + "\n"
	slice := strings.Repeat(row, 1000) + "\n"
	text := strings.Repeat(slice, MaxTaps/1_000_000+1)
	_, err := Read(strings.NewReader(text))
	if err == nil || !strings.Contains(err.Error(), "more than") {
		t.Errorf("got %v, want the tap limit", err)
	}
}

func TestWriteRejects(t *testing.T) {
	for _, a := range []*Array{
		{Shape: []int{2, 2}, Data: []float64{1, 2, 3}},
		{Shape: []int{}, Data: []float64{1}},
		{Shape: []int{1, 0, 1}},
		{Shape: []int{2}, Data: []float64{1, nan()}},
	} {
		if err := Write(&bytes.Buffer{}, a); err == nil {
			t.Errorf("%v: no error", a)
		}
	}
}

func nan() float64 { var z float64; return z / z }

func ExampleWrite() {
	a := &Array{Shape: []int{2, 2, 3}, Data: []float64{0, 1, 0, 1, 2, 1, 0.5, 1, 0.5, 1, 0, 1}}
	Write(os.Stdout, a)
	// Output:
	// # kernel of 3×2×2 taps (x×y×z): one row along x per line, rows along y,
	// # z-slices separated by a blank line
	// 0 1 0
	// 1 2 1
	//
	// 0.5 1 0.5
	// 1 0 1
}

func ExampleRead() {
	a, err := Read(strings.NewReader("1, 2, 1   # a row along x\n2, 4, 2\n"))
	fmt.Println(a.Shape, a.Data, err)
	// Output: [1 2 3] [1 2 1 2 4 2] <nil>
}
