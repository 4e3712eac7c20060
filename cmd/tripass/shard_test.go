package main

import (
	"bytes"
	"fmt"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// The property every test here checks: the union of the shards of a job equals the
// whole run's output byte for byte. The reference is the whole run of the same
// binary, whose filters are checked against scipy.ndimage elsewhere (volume's
// engine_scipy_test.go, the commands' tests); byte equality of the files also covers
// the writers' settings.

// shardVolume writes a small float32 stack of seeded noise (13×11×9, anisotropic
// spacing) and returns its path.
func shardVolume(t *testing.T, dir string) string {
	t.Helper()
	h := volume.Header{NX: 13, NY: 11, NZ: 9, Type: volume.Float32, Spacing: [3]float64{0.5, 0.5, 1.25}, Unit: "um"}
	rng := rand.New(rand.NewPCG(7, 7))
	data := make([]float32, h.NX*h.NY*h.NZ)
	for i := range data {
		data[i] = float32(rng.Float64()*100 - 20)
	}
	return writeStack(t, dir, "noise.tif", volume.NewMemSource(h, data))
}

// shmTempDir is t.TempDir on a memory file system when the machine has one: the
// shard tests write thousands of small files, each synced, which on a disk costs
// minutes and tests nothing more.
func shmTempDir(t *testing.T) string {
	t.Helper()
	if st, err := os.Stat("/dev/shm"); err == nil && st.IsDir() {
		if d, err := os.MkdirTemp("/dev/shm", "tripass-shard-test-"); err == nil {
			t.Cleanup(func() { os.RemoveAll(d) })
			return d
		}
	}
	return t.TempDir()
}

// mustRun runs tripass and fails the test on a non-zero exit.
func mustRun(t *testing.T, args ...string) string {
	t.Helper()
	code, out, errs := runCLI(t, args...)
	if code != 0 {
		t.Fatalf("tripass %s: exit %d: %s", strings.Join(args, " "), code, errs)
	}
	return out
}

// shardKernels writes the kernels of the convolve cases: a random 3×3×2 kernel (even
// depth, so the halo differs below and above; applied directly) and a tilted anisotropic Gaussian (Tucker plan).
func shardKernels(t *testing.T, dir string) (direct, tilted string) {
	t.Helper()
	rng := rand.New(rand.NewPCG(3, 3))
	var b strings.Builder
	for z := 0; z < 2; z++ {
		if z > 0 {
			b.WriteString("\n")
		}
		for y := 0; y < 3; y++ {
			for x := 0; x < 3; x++ {
				fmt.Fprintf(&b, "%.6f ", rng.Float64()-0.3)
			}
			b.WriteString("\n")
		}
	}
	direct = filepath.Join(dir, "random.txt")
	if err := os.WriteFile(direct, []byte(b.String()), 0o666); err != nil {
		t.Fatal(err)
	}
	tilted = filepath.Join(dir, "tilted.npy")
	mustRun(t, "kernel", "make", "oriented-gaussian", "--sigma", "1,0.7,1.2", "--angles", "0,30,0", "-o", tilted, "-q")
	return direct, tilted
}

func filesEqual(t *testing.T, a, b string) {
	t.Helper()
	x, err := os.ReadFile(a)
	if err != nil {
		t.Fatal(err)
	}
	y, err := os.ReadFile(b)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(x, y) {
		t.Fatalf("%s (%d bytes) differs from %s (%d bytes)", a, len(x), b, len(y))
	}
}

// foldersEqual compares the visible files of two slice folders byte for byte.
func foldersEqual(t *testing.T, a, b string) {
	t.Helper()
	list := func(d string) []string {
		ents, err := os.ReadDir(d)
		if err != nil {
			t.Fatal(err)
		}
		var names []string
		for _, e := range ents {
			if !strings.HasPrefix(e.Name(), ".") {
				names = append(names, e.Name())
			}
		}
		return names
	}
	na, nb := list(a), list(b)
	if strings.Join(na, ",") != strings.Join(nb, ",") {
		t.Fatalf("%s holds %v, %s holds %v", a, na, b, nb)
	}
	for _, n := range na {
		filesEqual(t, filepath.Join(a, n), filepath.Join(b, n))
	}
}

// TestShardsEqualWholeRun runs every filter type in every edge mode whole and in
// N = 1, 2, 3 and 7 tasks (7 tasks on 9 slices: shards of one and two slices, more
// tasks than most kernels' halo), into a multi-page TIFF (parts joined) and into a
// slice folder, and compares the bytes.
func TestShardsEqualWholeRun(t *testing.T) {
	dir := shmTempDir(t)
	in := shardVolume(t, dir)
	direct, tilted := shardKernels(t, dir)
	filters := []struct {
		name string
		args []string
	}{
		{"smooth-gaussian", []string{"smooth", "--sigma", "1.2,0.8,1.5"}},
		{"smooth-box", []string{"smooth", "--box", "3,3,5", "--compress", "lzw"}},
		{"gradient-sobel", []string{"gradient"}},
		{"gradient-gaussian", []string{"gradient", "--operator", "gaussian", "--sigma", "1", "--compress", "deflate"}},
		{"gradient-z", []string{"gradient", "--component", "z", "--physical"}},
		{"laplace-stencil", []string{"laplace", "--type", "int16"}},
		{"laplace-log", []string{"laplace", "--sigma", "1"}},
		{"dog", []string{"dog", "--sigma", "0.8", "--sigma2", "1.6"}},
		{"convolve-direct", []string{"convolve", "--kernel", direct, "--form", "direct"}},
		{"convolve-tucker", []string{"convolve", "--kernel", tilted, "--form", "tucker", "--tolerance", "1e-3"}},
	}
	edges := [][]string{
		{"--edge", "symmetric"}, {"--edge", "reflect"}, {"--edge", "replicate"},
		{"--edge", "periodic"}, {"--edge", "constant", "--fill", "7.5"},
	}
	type job struct {
		name string
		args []string
	}
	var jobs []job
	for _, f := range filters {
		for _, e := range edges {
			jobs = append(jobs, job{f.name + "/" + e[1], append(append([]string(nil), f.args...), e...)})
		}
	}
	jobs = append(jobs, job{"convert", []string{"convert"}}, job{"convert-uint16", []string{"convert", "--type", "uint16", "--compress", "lzw"}})
	for _, jb := range jobs {
		t.Run(jb.name, func(t *testing.T) {
			out := shmTempDir(t)
			run := func(outPath string, extra ...string) {
				args := append(append([]string{jb.args[0], in, outPath}, jb.args[1:]...), "-q")
				mustRun(t, append(args, extra...)...)
			}
			whole, wholeDir := filepath.Join(out, "whole.tif"), filepath.Join(out, "whole")+"/"
			run(whole)
			run(wholeDir)
			for _, n := range []int{1, 2, 3, 7} {
				part := filepath.Join(out, fmt.Sprintf("n%d.tif", n))
				folder := filepath.Join(out, fmt.Sprintf("n%d", n)) + "/"
				for i := n; i >= 1; i-- { // any order: the tasks are independent
					run(part, "--shard", fmt.Sprintf("%d/%d", i, n))
					run(folder, "--shard", fmt.Sprintf("%d/%d", i, n))
				}
				mustRun(t, "join", part, "-q", "--delete-parts")
				filesEqual(t, part, whole)
				// What a task killed while writing a slice leaves behind; join removes it.
				os.WriteFile(filepath.Join(folder, atomicfile.TempPrefix+"z0001.tif-1234"), []byte("half"), 0o666)
				mustRun(t, "join", folder, "-q")
				foldersEqual(t, folder, wholeDir)
				if ents, _ := os.ReadDir(folder); len(ents) != 9 {
					t.Errorf("after join the folder holds %d files, want the 9 slices", len(ents))
				}
				if _, err := os.Stat(filepath.Join(folder, shardRecordName)); !os.IsNotExist(err) {
					t.Errorf("join left the folder's record: %v", err)
				}
			}
		})
	}
}

// TestShardsOtherFormats joins parts into raw and NIfTI outputs, which must equal the
// whole run's files byte for byte (big-endian raw, gzip-compressed NIfTI included).
func TestShardsOtherFormats(t *testing.T) {
	dir := t.TempDir()
	in := shardVolume(t, dir)
	for _, tc := range []struct {
		out  string
		args []string
	}{
		{"out.raw", []string{"--raw-endian", "big"}},
		{"out.nii", nil},
		{"out.nii.gz", nil},
		{"out.tif", []string{"--bigtiff", "--compress", "deflate"}},
	} {
		t.Run(tc.out, func(t *testing.T) {
			d := t.TempDir()
			args := func(out string, extra ...string) []string {
				a := append([]string{"smooth", in, out, "--sigma", "1", "-q", "--type", "float64"}, tc.args...)
				return append(a, extra...)
			}
			whole := filepath.Join(d, "whole-"+tc.out)
			mustRun(t, args(whole)...)
			out := filepath.Join(d, tc.out)
			for i := 1; i <= 4; i++ {
				mustRun(t, args(out, "--shard", fmt.Sprintf("%d/4", i))...)
			}
			mustRun(t, "join", out, "-q")
			filesEqual(t, out, whole)
		})
	}
}

// TestShardsMoreTasksThanSlices: tasks with no slices succeed and write nothing; join
// expects no part from them.
func TestShardsMoreTasksThanSlices(t *testing.T) {
	dir := t.TempDir()
	in := shardVolume(t, dir) // 9 slices
	whole := filepath.Join(dir, "whole.tif")
	mustRun(t, "laplace", in, whole, "-q")
	out := filepath.Join(dir, "out.tif")
	empty := 0
	for i := 1; i <= 12; i++ {
		code, _, errs := runCLI(t, "laplace", in, out, "--shard", fmt.Sprintf("%d/12", i))
		if code != 0 {
			t.Fatalf("task %d of 12: exit %d: %s", i, code, errs)
		}
		if strings.Contains(errs, "has no slices") {
			empty++
			if _, err := os.Stat(partName(out, i, 12)); err == nil {
				t.Errorf("empty task %d wrote a part", i)
			}
		}
	}
	if empty != 3 {
		t.Errorf("%d empty tasks, want 3 (12 tasks, 9 slices)", empty)
	}
	mustRun(t, "join", out, "-q")
	filesEqual(t, out, whole)
}

func TestEvenSplit(t *testing.T) {
	for _, tc := range []struct{ count, nz int }{{1, 9}, {2, 9}, {3, 9}, {7, 9}, {12, 9}, {8, 1000003}, {1000, 7}} {
		next := 0
		for task := 1; task <= tc.count; task++ {
			z0, z1 := evenSplit(task, tc.count, tc.nz)
			if z0 != next || z1 < z0 || z1-z0 > (tc.nz+tc.count-1)/tc.count {
				t.Fatalf("%d tasks over %d slices: task %d gets [%d, %d) after %d", tc.count, tc.nz, task, z0, z1, next)
			}
			next = z1
		}
		if next != tc.nz {
			t.Errorf("%d tasks over %d slices cover %d", tc.count, tc.nz, next)
		}
	}
}

func TestShardFromEnv(t *testing.T) {
	tests := []struct {
		name        string
		env         map[string]string
		count       int // --shard-count
		task, tasks int
		err         string // part of the error, or "" for none
	}{
		{"slurm from 1", map[string]string{"SLURM_ARRAY_TASK_ID": "5", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "8", "SLURM_ARRAY_TASK_COUNT": "8"}, 0, 5, 8, ""},
		{"slurm from 0", map[string]string{"SLURM_ARRAY_TASK_ID": "0", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_MAX": "3"}, 0, 1, 4, ""},
		{"slurm count only", map[string]string{"SLURM_ARRAY_TASK_ID": "12", "SLURM_ARRAY_TASK_MIN": "10", "SLURM_ARRAY_TASK_COUNT": "6"}, 0, 3, 6, ""},
		{"slurm step", map[string]string{"SLURM_ARRAY_TASK_ID": "8", "SLURM_ARRAY_TASK_MIN": "0", "SLURM_ARRAY_TASK_MAX": "12", "SLURM_ARRAY_TASK_STEP": "4", "SLURM_ARRAY_TASK_COUNT": "4"}, 0, 3, 4, ""},
		{"slurm list", map[string]string{"SLURM_ARRAY_TASK_ID": "3", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "7", "SLURM_ARRAY_TASK_COUNT": "3"}, 0, 0, 0, "evenly stepped"},
		{"slurm count check", map[string]string{"SLURM_ARRAY_TASK_ID": "1", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "8"}, 4, 0, 0, "disagrees"},
		{"slurm no min", map[string]string{"SLURM_ARRAY_TASK_ID": "1"}, 0, 0, 0, "SLURM_ARRAY_TASK_MIN"},
		{"slurm junk", map[string]string{"SLURM_ARRAY_TASK_ID": "x", "SLURM_ARRAY_TASK_MIN": "1", "SLURM_ARRAY_TASK_MAX": "8"}, 0, 0, 0, "not a whole number"},
		{"kubernetes", map[string]string{"JOB_COMPLETION_INDEX": "0"}, 4, 1, 4, ""},
		{"kubernetes last", map[string]string{"JOB_COMPLETION_INDEX": "3"}, 4, 4, 4, ""},
		{"kubernetes past", map[string]string{"JOB_COMPLETION_INDEX": "4"}, 4, 0, 0, "not below"},
		{"kubernetes no count", map[string]string{"JOB_COMPLETION_INDEX": "2"}, 0, 0, 0, "--shard-count"},
		{"nothing", map[string]string{}, 0, 0, 0, "SLURM_ARRAY_TASK_ID nor JOB_COMPLETION_INDEX"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			task, n, _, err := shardFromEnv(func(k string) string { return tc.env[k] }, tc.count)
			if tc.err != "" {
				if err == nil || !strings.Contains(err.Error(), tc.err) || exitCode(err) != ExitUsage {
					t.Fatalf("err %v (exit %d), want a usage error with %q", err, exitCode(err), tc.err)
				}
				return
			}
			if err != nil || task != tc.task || n != tc.tasks {
				t.Fatalf("task %d of %d, %v; want %d of %d", task, n, err, tc.task, tc.tasks)
			}
		})
	}
}

func TestShardFlagErrors(t *testing.T) {
	dir := t.TempDir()
	in := shardVolume(t, dir)
	out := filepath.Join(dir, "o.tif")
	for _, tc := range []struct {
		args []string
		want string
	}{
		{[]string{"--shard", "0/4"}, "I counts from 1"},
		{[]string{"--shard", "5/4"}, "not among 1"},
		{[]string{"--shard", "2"}, "want I/N"},
		{[]string{"--shard", "1/0"}, "1 or more"},
		{[]string{"--shard", "1/4", "--shard-count", "3"}, "disagrees"},
		{[]string{"--shard-count", "3"}, "goes with --shard auto"},
		{[]string{"--shard", "auto"}, "no scheduler task found"},
	} {
		t.Setenv("SLURM_ARRAY_TASK_ID", "")
		t.Setenv("JOB_COMPLETION_INDEX", "")
		code, _, errs := runCLI(t, append([]string{"smooth", in, out, "--sigma", "1"}, tc.args...)...)
		if code != ExitUsage || !strings.Contains(errs, tc.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
			t.Errorf("%v: exit %d, %q; want exit %d and one line with %q", tc.args, code, errs, ExitUsage, tc.want)
		}
	}
	if _, err := os.Stat(out); err == nil {
		t.Error("a refused task wrote the output")
	}
}

// shardParts runs smooth in n tasks into out and returns the part paths.
func shardParts(t *testing.T, in, out string, n int, extra ...string) []string {
	t.Helper()
	var parts []string
	for i := 1; i <= n; i++ {
		mustRun(t, append([]string{"smooth", in, out, "--sigma", "1", "-q", "--shard", fmt.Sprintf("%d/%d", i, n)}, extra...)...)
		parts = append(parts, partName(out, i, n))
	}
	return parts
}

// TestJoinRefuses: join names the problem in one line, exits with the input-error
// code and writes no output.
func TestJoinRefuses(t *testing.T) {
	dir := t.TempDir()
	in := shardVolume(t, dir)
	tests := []struct {
		name  string
		setup func(d string) []string // join's arguments
		want  string
		code  int
	}{
		{"missing part", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			p := shardParts(t, in, out, 3)
			os.Remove(p[1])
			return []string{out}
		}, "task 2 (slices 3–5)", ExitInput},
		{"missing part listed", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			p := shardParts(t, in, out, 3)
			return []string{p[0], p[2], out}
		}, "missing", ExitInput},
		{"overlapping parts", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			p := shardParts(t, in, out, 3)
			dup := filepath.Join(d, "copy.tif")
			b, _ := os.ReadFile(p[1])
			os.WriteFile(dup, b, 0o666)
			return []string{p[0], p[1], dup, p[2], out}
		}, "overlap", ExitInput},
		{"different jobs", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			p := shardParts(t, in, out, 2)
			q := shardParts(t, in, filepath.Join(d, "other.tif"), 2, "--edge", "reflect")
			return []string{p[0], q[1], out}
		}, "different jobs", ExitInput},
		{"different task counts", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			shardParts(t, in, out, 2)
			shardParts(t, in, out, 3)
			return []string{out}
		}, "different jobs", ExitInput},
		{"truncated part", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			p := shardParts(t, in, out, 2)
			st, _ := os.Stat(p[1])
			os.Truncate(p[1], st.Size()*2/3)
			return []string{out}
		}, "unreadable", ExitInput},
		{"not a part", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			return []string{in, out}
		}, "not a part file", ExitInput},
		{"no parts", func(d string) []string {
			return []string{filepath.Join(d, "o.tif")}
		}, "no part files", ExitInput},
		{"output exists", func(d string) []string {
			out := filepath.Join(d, "o.tif")
			shardParts(t, in, out, 2)
			os.WriteFile(out, []byte("x"), 0o666)
			return []string{out}
		}, "exists", ExitUsage},
		{"incomplete folder", func(d string) []string {
			out := filepath.Join(d, "f") + "/"
			mustRun(t, "smooth", in, out, "--sigma", "1", "-q", "--shard", "2/3")
			return []string{out}
		}, "6 of 9 slices are missing", ExitInput},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d := shmTempDir(t)
			args := tc.setup(d)
			out := args[len(args)-1]
			before, _ := os.ReadFile(out)
			code, _, errs := runCLI(t, append([]string{"join"}, args...)...)
			if code != tc.code || !strings.Contains(errs, tc.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
				t.Fatalf("exit %d, %q; want exit %d and one line with %q", code, errs, tc.code, tc.want)
			}
			after, _ := os.ReadFile(out)
			if !bytes.Equal(before, after) {
				t.Error("a refused join changed the output")
			}
		})
	}
}

// TestShardFolderGuards: a task refuses a folder that holds another job's slices or
// TIFF files of no sharded job, unless --overwrite; a rerun of the same task replaces
// its own files.
func TestShardFolderGuards(t *testing.T) {
	dir := t.TempDir()
	in := shardVolume(t, dir)
	out := filepath.Join(dir, "f") + "/"
	smooth := func(extra ...string) (int, string) {
		code, _, errs := runCLI(t, append([]string{"smooth", in, out, "-q"}, extra...)...)
		return code, errs
	}
	if code, errs := smooth("--sigma", "1", "--shard", "1/2"); code != 0 {
		t.Fatal(errs)
	}
	if code, errs := smooth("--sigma", "1", "--shard", "1/2"); code != 0 {
		t.Fatalf("rerun of the same task: %s", errs)
	}
	if code, errs := smooth("--sigma", "2", "--shard", "2/2"); code != ExitUsage || !strings.Contains(errs, "another job") {
		t.Fatalf("task of another job: exit %d, %q", code, errs)
	}
	if code, errs := smooth("--sigma", "2", "--shard", "2/2", "--overwrite"); code != 0 {
		t.Fatalf("--overwrite: %s", errs)
	}
	plain := filepath.Join(dir, "plain") + "/"
	mustRun(t, "convert", in, plain, "-q")
	code, _, errs := runCLI(t, "smooth", in, plain, "--sigma", "1", "--shard", "1/2", "-q")
	if code != ExitUsage || !strings.Contains(errs, "no sharded tripass job") {
		t.Fatalf("folder of a whole run: exit %d, %q", code, errs)
	}
}

// TestShardPartGuards: a rerun of a task replaces its part; a part of another job under
// the same name is kept unless --overwrite; parts listed explicitly may be joined into
// another format.
func TestShardPartGuards(t *testing.T) {
	dir := shmTempDir(t)
	in := shardVolume(t, dir)
	out := filepath.Join(dir, "o.tif")
	p := shardParts(t, in, out, 2)
	shardParts(t, in, out, 2) // the same job again
	code, _, errs := runCLI(t, "smooth", in, out, "--sigma", "3", "--shard", "1/2", "-q")
	if code != ExitUsage || !strings.Contains(errs, "another job") {
		t.Fatalf("part of another job: exit %d, %q", code, errs)
	}
	// The same job spelled differently: default values given, flags in another order.
	mustRun(t, "smooth", "--edge", "symmetric", "--sigma", "1", in, out, "-q", "--shard", "2/2", "--compress", "none")
	mustRun(t, "join", p[1], p[0], filepath.Join(dir, "joined")+"/", "-q")
	mustRun(t, "smooth", in, filepath.Join(dir, "whole")+"/", "--sigma", "1", "-q")
	foldersEqual(t, filepath.Join(dir, "joined"), filepath.Join(dir, "whole"))
}

// TestShardHelperProcess is not a test: TestShardsAsProcesses runs the test binary as
// tripass through it.
func TestShardHelperProcess(t *testing.T) {
	if os.Getenv("TRIPASS_SHARD_HELPER") != "1" {
		t.Skip("runs only as the tripass process of TestShardsAsProcesses")
	}
	args := strings.Split(os.Getenv("TRIPASS_SHARD_ARGS"), "\x1f")
	os.Exit(run(append([]string{"tripass"}, args...), os.Stdout, os.Stderr))
}

// TestShardsAsProcesses runs the tasks of a Slurm array (--array=1-4) and of a
// Kubernetes Indexed Job (4 completions) as separate processes at the same time, with
// --shard auto and the environment the schedulers set, into one folder and into part
// files, and compares with the whole run.
func TestShardsAsProcesses(t *testing.T) {
	if testing.Short() {
		t.Skip("starts processes")
	}
	dir := t.TempDir()
	in := shardVolume(t, dir)
	tripass := func(env []string, args ...string) *exec.Cmd {
		cmd := exec.Command(os.Args[0], "-test.run=^TestShardHelperProcess$")
		cmd.Env = append(os.Environ(), "TRIPASS_SHARD_HELPER=1", "TRIPASS_SHARD_ARGS="+strings.Join(args, "\x1f"),
			"SLURM_ARRAY_TASK_ID=", "JOB_COMPLETION_INDEX=")
		cmd.Env = append(cmd.Env, env...)
		return cmd
	}
	job := []string{"gradient", in, "", "--operator", "gaussian", "--sigma", "1.2", "--edge", "reflect", "-q", "--shard", "auto", "--threads", "1"}
	whole := filepath.Join(dir, "whole.tif")
	wholeDir := filepath.Join(dir, "whole") + "/"
	mustRun(t, "gradient", in, whole, "--operator", "gaussian", "--sigma", "1.2", "--edge", "reflect", "-q")
	mustRun(t, "gradient", in, wholeDir, "--operator", "gaussian", "--sigma", "1.2", "--edge", "reflect", "-q")
	schedulers := []struct {
		name string
		env  func(i int) []string
		args []string
	}{
		{"slurm", func(i int) []string {
			return []string{fmt.Sprintf("SLURM_ARRAY_TASK_ID=%d", i+1), "SLURM_ARRAY_TASK_MIN=1", "SLURM_ARRAY_TASK_MAX=4",
				"SLURM_ARRAY_TASK_COUNT=4", "SLURM_ARRAY_TASK_STEP=1"}
		}, nil},
		{"kubernetes", func(i int) []string { return []string{fmt.Sprintf("JOB_COMPLETION_INDEX=%d", i)} }, []string{"--shard-count", "4"}},
	}
	for _, s := range schedulers {
		t.Run(s.name, func(t *testing.T) {
			for _, out := range []string{filepath.Join(dir, s.name+".tif"), filepath.Join(dir, s.name) + "/"} {
				args := append(append([]string(nil), job...), s.args...)
				args[2] = out
				var wg sync.WaitGroup
				errs := make([]error, 4)
				outs := make([][]byte, 4)
				for i := 0; i < 4; i++ {
					wg.Add(1)
					go func() {
						defer wg.Done()
						outs[i], errs[i] = tripass(s.env(i), args...).CombinedOutput()
					}()
				}
				wg.Wait()
				for i, err := range errs {
					if err != nil {
						t.Fatalf("task %d: %v: %s", i, err, outs[i])
					}
				}
				mustRun(t, "join", out, "-q")
				if strings.HasSuffix(out, "/") {
					foldersEqual(t, out, wholeDir)
				} else {
					filesEqual(t, out, whole)
				}
			}
		})
	}
}

// TestShardsAgainstSciPy checks shards against outside references when /usr/bin/python3
// has them (Debian's python3-scipy and python3-tifffile; skips otherwise): tifffile reads
// every part file as a TIFF and finds the job's record in its ImageDescription, the
// parts stacked in task order equal the joined file exactly, and the joined Gaussian
// matches scipy.ndimage.gaussian_filter (SciPy 1.10.1, Debian 12; modes reflect,
// mirror, nearest, wrap for our symmetric, reflect, replicate, periodic) and, for
// constant edges, scipy.ndimage.convolve with the full 3D kernel, to 1e-5 of the data
// range.
func TestShardsAgainstSciPy(t *testing.T) {
	const python = "/usr/bin/python3"
	if testing.Short() {
		t.Skip("-short")
	}
	if _, err := os.Stat(python); err != nil {
		t.Skip("no " + python)
	}
	dir := shmTempDir(t)
	in := shardVolume(t, dir)
	edges := map[string]string{"symmetric": "reflect", "reflect": "mirror", "replicate": "nearest", "periodic": "wrap", "constant": "constant"}
	pyArgs := []string{"-c", `
import sys, json, numpy as np, tifffile
from scipy import ndimage
inp = tifffile.imread(sys.argv[1]).astype(np.float64)
sigma = (1.5, 0.8, 1.2)  # z, y, x
def kernel1d(s):
    r = int(4.0 * s + 0.5)
    x = np.arange(-r, r + 1)
    k = np.exp(-0.5 * x * x / (s * s))
    return k / k.sum()
for joined, mode, parts in zip(*[iter(sys.argv[2:])] * 3):
    out = tifffile.imread(joined)
    stack, z = [], 0
    for i, p in enumerate(parts.split(",")):
        with tifffile.TiffFile(p) as tf:
            desc = tf.pages[0].tags["ImageDescription"].value
            rec = json.loads([f for f in desc.split() if f.startswith("note=")][0][5:])
            assert rec["task"] == i + 1 and rec["z0"] == z, (p, rec)
            a = tf.asarray()
            a = a.reshape((-1,) + a.shape[-2:])
            assert a.shape[0] == rec["z1"] - rec["z0"], (p, a.shape, rec)
            z = rec["z1"]
            stack.append(a)
    exact = np.array_equal(np.concatenate(stack), out)
    if mode == "constant":
        kz, ky, kx = (kernel1d(s) for s in sigma)
        k3 = kz[:, None, None] * ky[None, :, None] * kx[None, None, :]
        ref = ndimage.convolve(inp, k3, mode="constant", cval=7.5)
    else:
        ref = ndimage.gaussian_filter(inp, sigma, mode=mode)
    print(mode, exact, np.abs(out - ref).max() / (inp.max() - inp.min()))
`, in}
	for ours, theirs := range edges {
		out := filepath.Join(dir, ours+".tif")
		var parts []string
		for i := 1; i <= 3; i++ {
			mustRun(t, "smooth", in, out, "--sigma", "1.2,0.8,1.5", "--edge", ours, "--fill", "7.5", "-q", "--shard", fmt.Sprintf("%d/3", i))
			parts = append(parts, partName(out, i, 3))
		}
		mustRun(t, "join", out, "-q")
		pyArgs = append(pyArgs, out, theirs, strings.Join(parts, ","))
	}
	got, err := exec.Command(python, pyArgs...).CombinedOutput()
	if err != nil {
		if strings.Contains(string(got), "ModuleNotFoundError") {
			t.Skip("no NumPy, SciPy or tifffile for " + python)
		}
		t.Fatalf("%v: %s", err, got)
	}
	t.Logf("mode, parts equal joined, difference from SciPy / data range:\n%s", got)
	lines := strings.Split(strings.TrimSpace(string(got)), "\n")
	if len(lines) != len(edges) {
		t.Fatalf("python printed %q", got)
	}
	for _, l := range lines {
		var mode, exact string
		var rel float64
		if _, err := fmt.Sscan(l, &mode, &exact, &rel); err != nil {
			t.Fatalf("%q: %v", l, err)
		}
		if exact != "True" {
			t.Errorf("%s: the parts stacked differ from the joined file", mode)
		}
		if rel > 1e-5 {
			t.Errorf("%s: joined shards differ from SciPy by %.3g of the data range", mode, rel)
		}
	}
}
