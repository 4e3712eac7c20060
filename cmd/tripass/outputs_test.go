package main

import (
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"syscall"
	"testing"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// leftovers lists the temporary files and folders tripass left in dir.
func leftovers(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range ents {
		if strings.HasPrefix(e.Name(), atomicfile.TempPrefix) {
			out = append(out, e.Name())
		}
	}
	return out
}

// TestOutputsAreAtomic writes every kind of output (multi-page TIFF, BigTIFF, slice
// folder, raw, .nii, .nii.gz) with convert and smooth, and checks for each that it
// appears complete with nothing temporary left beside it, that an existing output is
// kept without --overwrite and replaced with it, and that a run that fails on a
// damaged input leaves nothing under the final name.
func TestOutputsAreAtomic(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	b, _ := os.ReadFile(src)
	damaged := filepath.Join(dir, "damaged.tif") // pages cut off after the first IFDs
	os.WriteFile(damaged, b[:len(b)*2/3], 0o644)
	for _, name := range []string{"o.tif", "o_big.tif", "o_dir/", "o.raw", "o.nii", "o.nii.gz"} {
		extra := []string{"-q"}
		if name == "o_big.tif" {
			extra = append(extra, "--bigtiff")
		}
		for _, cmd := range [][]string{{"convert"}, {"smooth", "--sigma", "1"}} {
			t.Run(cmd[0]+"/"+name, func(t *testing.T) {
				final := filepath.Join(dir, strings.TrimSuffix(name, "/"))
				out := final
				if strings.HasSuffix(name, "/") {
					out += "/" // a slice folder
				}
				defer os.RemoveAll(final)
				args := func(in string, more ...string) []string {
					a := append([]string{cmd[0], in, out}, cmd[1:]...)
					return append(append(a, extra...), more...)
				}
				if code, _, errs := runCLI(t, args(src)...); code != 0 {
					t.Fatalf("exit %d: %s", code, errs)
				}
				if _, err := os.Stat(final); err != nil {
					t.Fatalf("no output: %v", err)
				}
				if l := leftovers(t, dir); len(l) > 0 {
					t.Fatalf("temporary files left: %v", l)
				}
				first := digest(t, final)
				// An existing output is kept without --overwrite.
				code, _, errs := runCLI(t, args(src, "--type", "float32")...)
				if code != ExitUsage || !strings.Contains(errs, "--overwrite") {
					t.Errorf("existing output: exit %d %q, want a usage error naming --overwrite", code, errs)
				}
				if digest(t, final) != first {
					t.Fatal("an existing output was changed without --overwrite")
				}
				// A run that fails keeps the old output and leaves nothing temporary.
				if code, _, _ := runCLI(t, args(damaged, "--overwrite")...); code != ExitInput {
					t.Errorf("damaged input: exit %d, want %d", code, ExitInput)
				}
				if digest(t, final) != first {
					t.Fatal("a failed run changed the existing output")
				}
				if l := leftovers(t, dir); len(l) > 0 {
					t.Fatalf("temporary files left after a failed run: %v", l)
				}
				// With --overwrite the output is replaced.
				if code, _, errs := runCLI(t, args(src, "--type", "float32", "--overwrite")...); code != 0 {
					t.Fatalf("--overwrite: exit %d: %s", code, errs)
				}
				if digest(t, final) == first {
					t.Error("--overwrite did not replace the output")
				}
				// A failed run with no earlier output leaves nothing under the name.
				os.RemoveAll(final)
				runCLI(t, args(damaged)...)
				if exists(final) || len(leftovers(t, dir)) > 0 {
					t.Error("a failed run left an output or temporary files")
				}
			})
		}
	}
}

// TestOutputNamingAnInputIsRefused: for a file and a slice-folder input, an output
// that is the input by the same name, another spelling, a trailing slash or a
// symbolic link is refused with a usage error, and the input is untouched.
func TestOutputNamingAnInputIsRefused(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	folder := filepath.Join(dir, "slices")
	if code, _, errs := runCLI(t, "convert", src, folder+"/", "-q"); code != 0 {
		t.Fatalf("making a folder input: exit %d %s", code, errs)
	}
	os.Symlink(src, filepath.Join(dir, "link.tif"))
	os.Symlink(folder, filepath.Join(dir, "link_dir"))
	os.Mkdir(filepath.Join(dir, "sub"), 0o755)
	cases := []struct{ in, out string }{
		{src, src},
		{src, filepath.Join(dir, "link.tif")},
		{src, dir + "/./rock.tif"},
		{src, dir + "/sub/../rock.tif"},
		{filepath.Join(dir, "link.tif"), src},
		{folder, folder},
		{folder, folder + "/"},
		{folder + "/", dir + "/./slices/"},
		{folder, filepath.Join(dir, "link_dir") + "/"},
		{filepath.Join(dir, "link_dir"), dir + "/sub/../slices"},
	}
	before := map[string]fileState{src: stateOf(t, src), folder: stateOf(t, folder)}
	for _, tc := range cases {
		for _, cmd := range [][]string{{"convert", tc.in, tc.out, "--overwrite"}, {"smooth", tc.in, tc.out, "--sigma", "1", "--overwrite"}} {
			code, _, errs := runCLI(t, append(cmd, "-q")...)
			if code != ExitUsage || !strings.Contains(errs, "also an input") {
				t.Errorf("%v: exit %d %q, want a refusal", cmd, code, errs)
			}
		}
	}
	for p, st := range before {
		if stateOf(t, p) != st {
			t.Errorf("%s changed", p)
		}
	}
}

// TestInputsAreNeverModified runs every command that reads a stack or a kernel on
// inputs of every kind and checks that content and modification time stay the same.
func TestInputsAreNeverModified(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	inputs := map[string][]string{src: nil}
	for _, name := range []string{"in_dir/", "in.nii", "in.nii.gz", "in.raw"} {
		p := filepath.Join(dir, strings.TrimSuffix(name, "/"))
		if code, _, errs := runCLI(t, "convert", src, p+strings.TrimPrefix(name, strings.TrimSuffix(name, "/")), "-q"); code != 0 {
			t.Fatalf("making %s: exit %d %s", name, code, errs)
		}
		inputs[p] = nil
	}
	inputs[filepath.Join(dir, "in.raw")] = []string{"--raw-size", "23,19,11", "--raw-type", "uint16"}
	kernel := filepath.Join(dir, "k.txt")
	os.WriteFile(kernel, []byte("1 2 1\n2 4 2\n1 2 1\n"), 0o644)
	states := map[string]fileState{kernel: stateOf(t, kernel)}
	for p := range inputs {
		states[p] = stateOf(t, p)
	}
	n := 0
	for in, extra := range inputs {
		out := filepath.Join(dir, "out.tif")
		for _, cmd := range [][]string{
			{"info", in},
			{"convert", in, out},
			{"smooth", in, out, "--sigma", "1"},
			{"gradient", in, out},
			{"laplace", in, out},
			{"dog", in, out, "--sigma", "1", "--sigma2", "2"},
			{"convolve", in, out, "--kernel", kernel},
			{"preview", in, filepath.Join(dir, "p.png")},
		} {
			args := append(append(cmd, extra...), "-q")
			if cmd[0] != "info" {
				args = append(args, "--overwrite")
			}
			if code, _, errs := runCLI(t, args...); code != 0 {
				t.Errorf("%v: exit %d %s", args, code, errs)
			}
			n++
		}
	}
	runCLI(t, "kernel", "inspect", kernel)
	for p, st := range states {
		if stateOf(t, p) != st {
			t.Errorf("%s changed", p)
		}
	}
	t.Logf("%d runs, %d inputs unchanged", n, len(states))
}

// TestExitCodes checks that each documented exit code is returned where it should be
// (ExitInterrupted is checked by TestInterruptAndResume, with a real signal).
func TestExitCodes(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	out := filepath.Join(dir, "out.tif")
	bad := filepath.Join(dir, "bad.tif")
	os.WriteFile(bad, []byte("II*\x00\x08\x00\x00\x00"), 0o644)
	// ExitFailure: another run holds the output.
	release, err := lockOutput(filepath.Join(dir, "held.tif"))
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		args []string
		code int
		want string
	}{
		{[]string{"convert", src, out}, ExitOK, ""},
		{[]string{"smooth", src, filepath.Join(dir, "held.tif"), "--sigma", "1"}, ExitFailure, "another tripass run"},
		{[]string{"smooth", src, out, "--sigma", "1", "--no-such-flag"}, ExitUsage, "unknown flag"},
		{[]string{"smooth", src, out, "--sigma", "1", "--edge", "sideways"}, ExitUsage, "--edge"},
		{[]string{"convert", src, filepath.Join(dir, "out.xyz")}, ExitUsage, "cannot tell the stack format"},
		{[]string{"convert", bad, filepath.Join(dir, "o2.tif")}, ExitInput, "bad.tif"},
		{[]string{"convert", filepath.Join(dir, "missing.tif"), filepath.Join(dir, "o3.tif")}, ExitIO, "missing.tif"},
		{[]string{"convert", src, filepath.Join(dir, "no", "such", "folder", "o.tif")}, ExitIO, "o.tif"},
	}
	for _, tc := range cases {
		code, _, errs := runCLI(t, append(tc.args, "-q")...)
		if code != tc.code || !strings.Contains(errs, tc.want) {
			t.Errorf("%v: exit %d %q, want %d with %q", tc.args[:2], code, errs, tc.code, tc.want)
		}
	}
	release()
	if code, _, errs := runCLI(t, "smooth", src, filepath.Join(dir, "held.tif"), "--sigma", "1", "-q"); code != 0 {
		t.Errorf("after the other run: exit %d %s", code, errs)
	}
}

// TestValuesAreCounted: NaN and infinite input voxels are counted and reported by
// convert and by the filters, and values that an integer output type cannot hold are
// clamped and counted (common practice: round to nearest, clamp to the type's range,
// NaN to 0).
func TestValuesAreCounted(t *testing.T) {
	dir := t.TempDir()
	const n = 8 * 8 * 4
	vals := make([]float32, n)
	for i := range vals {
		vals[i] = float32(i % 200)
	}
	nan, inf := 0, 0
	for i := 0; i < 10; i++ {
		vals[7*i] = float32(math.NaN())
		nan++
	}
	for i := 0; i < 3; i++ {
		vals[100+5*i] = float32(math.Inf(1 - 2*(i%2)))
		inf++
	}
	for i := 0; i < 6; i++ {
		vals[200+3*i] = 300 + float32(i) // beyond uint8
	}
	vals[250] = -5
	b := make([]byte, 4*n)
	for i, v := range vals {
		binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(v))
	}
	in := filepath.Join(dir, "in.raw")
	os.WriteFile(in, b, 0o644)
	raw := []string{"--raw-size", "8,8,4", "--raw-type", "float32"}
	code, _, errs := runCLI(t, append([]string{"convert", in, filepath.Join(dir, "o.tif"), "--type", "uint8"}, raw...)...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	// NaN and ±Inf cannot be held by uint8 either: they are among the clamped.
	for _, want := range []string{
		fmt.Sprintf("the input holds %d NaN and %d infinite voxels", nan, inf),
		fmt.Sprintf("%d output voxels were outside the uint8 range", nan+inf+6+1),
	} {
		if !strings.Contains(errs, want) {
			t.Errorf("convert: stderr %q lacks %q", errs, want)
		}
	}
	code, _, errs = runCLI(t, append([]string{"smooth", in, filepath.Join(dir, "s.tif"), "--sigma", "0.5"}, raw...)...)
	if code != 0 || !strings.Contains(errs, fmt.Sprintf("the input holds %d NaN and %d infinite voxels", nan, inf)) {
		t.Errorf("smooth: exit %d, stderr %q", code, errs)
	}
}

// TestCountNonFinite checks the bit-pattern count against math.IsNaN and math.IsInf
// (IEEE 754: an all-ones exponent is Inf with a zero fraction, NaN otherwise) on both
// float types, with signed values and payload NaNs.
func TestCountNonFinite(t *testing.T) {
	vals := []float64{0, -0.0, 1, -2.5, math.NaN(), -math.NaN(), math.Inf(1), math.Inf(-1),
		math.Float64frombits(0x7ff0000000000001), math.MaxFloat64, math.SmallestNonzeroFloat64}
	for _, typ := range []volume.SampleType{volume.Float32, volume.Float64, volume.Uint16} {
		s := volume.NewSlice(len(vals), 1, typ)
		var wantNaN, wantInf int64
		for i, v := range vals {
			if typ == volume.Float32 {
				binary.LittleEndian.PutUint32(s.Data[4*i:], math.Float32bits(float32(v)))
				v = float64(float32(v))
			} else if typ == volume.Float64 {
				binary.LittleEndian.PutUint64(s.Data[8*i:], math.Float64bits(v))
			} else {
				continue
			}
			if math.IsNaN(v) {
				wantNaN++
			} else if math.IsInf(v, 0) {
				wantInf++
			}
		}
		if nan, inf := countNonFinite(s); nan != wantNaN || inf != wantInf {
			t.Errorf("%v: %d NaN, %d Inf; want %d, %d", typ, nan, inf, wantNaN, wantInf)
		}
	}
}

// TestWriteFailureMessages: the failures of the file system a run can meet while
// writing become one line naming the output and the cause, with ExitIO (the file-size
// limit is checked for real by TestFileSizeLimit; a full disk cannot be made in a test
// without privileges, so its error value is made here).
func TestWriteFailureMessages(t *testing.T) {
	for _, tc := range []struct {
		err  error
		want string
	}{
		{&os.PathError{Op: "write", Path: ".tripass-part-o.raw.resumable", Err: syscall.ENOSPC}, "the disk is full"},
		{fmt.Errorf("raw: o.raw: writing slice 3: %w", &os.PathError{Op: "write", Path: "p", Err: syscall.EFBIG}), "the file-size limit was reached"},
		{&os.PathError{Op: "open", Path: "p", Err: syscall.EACCES}, "permission denied"},
	} {
		err := writeFailure("o.raw", 3, tc.err)
		if err == nil || exitCode(err) != ExitIO || !strings.Contains(err.Error(), "o.raw: writing output slice 3 failed: "+tc.want) ||
			strings.Contains(err.Error(), "\n") {
			t.Errorf("%v: got %v (exit %d)", tc.err, err, exitCode(err))
		}
	}
	if writeFailure("o.raw", 0, errors.New("slice of 3×3 float32, header says 4×4")) != nil {
		t.Error("an error that is not the file system's was taken for one")
	}
}
