package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"
)

// TestMain lets the test binary stand in for the tripass command: with
// TRIPASS_TEST_AS_MAIN=1 in its environment it runs tripass on its arguments and exits.
// The tests below start it as a separate process, to send it signals, kill it and run
// it under resource limits, without needing the go tool to build the command.
func TestMain(m *testing.M) {
	if os.Getenv("TRIPASS_TEST_AS_MAIN") == "1" {
		// Tests may ask for checkpoints more often than a real run makes them, so that
		// kills find more varied durable points.
		if n, err := strconv.ParseInt(os.Getenv("TRIPASS_TEST_CHECKPOINT_BYTES"), 10, 64); err == nil {
			checkpointBytes = n
		}
		os.Exit(run(append([]string{"tripass"}, os.Args[1:]...), os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// tripassProcess returns a command that runs tripass with args in dir.
func tripassProcess(t *testing.T, dir string, args ...string) *exec.Cmd {
	t.Helper()
	self, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(self, args...)
	cmd.Dir = dir
	cmd.Env = append(os.Environ(), "TRIPASS_TEST_AS_MAIN=1")
	return cmd
}

// runProcess runs tripass to completion and returns its exit code and stderr.
func runProcess(t *testing.T, dir string, args ...string) (int, string) {
	t.Helper()
	cmd := tripassProcess(t, dir, args...)
	var errb bytes.Buffer
	cmd.Stderr = &errb
	err := cmd.Run()
	var ee *exec.ExitError
	if err != nil && !errors.As(err, &ee) {
		t.Fatal(err)
	}
	return cmd.ProcessState.ExitCode(), errb.String()
}

// writeRawFloat32 writes an nx×ny×nz float32 stack of smooth structure plus noise
// (fixed seed) as little-endian raw data, and returns the --raw-* arguments for it.
func writeRawFloat32(t *testing.T, path string, nx, ny, nz int) []string {
	t.Helper()
	rng := rand.New(rand.NewPCG(11, 13))
	b := make([]byte, 4*nx*ny*nz)
	i := 0
	for z := 0; z < nz; z++ {
		for y := 0; y < ny; y++ {
			for x := 0; x < nx; x++ {
				v := float32(100*math.Sin(float64(x)/9)*math.Cos(float64(y+z)/13)) + float32(rng.NormFloat64())
				binary.LittleEndian.PutUint32(b[i:], math.Float32bits(v))
				i += 4
			}
		}
	}
	if err := os.WriteFile(path, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return []string{"--raw-size", fmt.Sprintf("%d,%d,%d", nx, ny, nz), "--raw-type", "float32"}
}

// digest is a SHA-256 of a file, or of every file of a folder in name order.
func digest(t *testing.T, path string) string {
	t.Helper()
	h := sha256.New()
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	files := []string{path}
	if st.IsDir() {
		ents, _ := os.ReadDir(path)
		files = files[:0]
		for _, e := range ents {
			files = append(files, filepath.Join(path, e.Name()))
			h.Write([]byte(e.Name()))
		}
	}
	for _, f := range files {
		b, err := os.ReadFile(f)
		if err != nil {
			t.Fatal(err)
		}
		h.Write(b)
	}
	return string(h.Sum(nil))
}

// firstDifference describes where two files first differ.
func firstDifference(a, b string) string {
	x, _ := os.ReadFile(a)
	y, _ := os.ReadFile(b)
	for i := 0; i < min(len(x), len(y)); i++ {
		if x[i] != y[i] {
			return fmt.Sprintf("first difference at byte %d of %d and %d", i, len(x), len(y))
		}
	}
	return fmt.Sprintf("lengths %d and %d", len(x), len(y))
}

// fileState is what an input must keep: its content and modification time.
type fileState struct {
	sum string
	mod time.Time
}

func stateOf(t *testing.T, path string) fileState {
	t.Helper()
	st, err := os.Stat(path)
	if err != nil {
		t.Fatal(err)
	}
	return fileState{digest(t, path), st.ModTime()}
}

func exists(path string) bool {
	_, err := os.Lstat(path)
	return err == nil
}

// TestKillAndResume kills running smooth commands with SIGKILL at random moments and
// checks, after each kill, that nothing is under the output's final name unless the
// run had finished, and that --resume then finishes with an output byte-identical to
// an uninterrupted run's, for raw, multi-page TIFF (LZW), slice-folder and .nii.gz
// outputs. Some resumed runs are killed again before they are resumed a second time.
func TestKillAndResume(t *testing.T) {
	if testing.Short() {
		t.Skip("about 40 s of runs")
	}
	dir := t.TempDir()
	raw := writeRawFloat32(t, filepath.Join(dir, "in.raw"), 256, 256, 128)
	base := append([]string{"smooth", "in.raw", "", "--sigma", "2", "--threads", "1", "-q"}, raw...)
	outputs := []struct {
		name  string
		extra []string
	}{
		{"out.raw", nil},
		{"out.tif", []string{"--compress", "lzw"}},
		{"outdir/", nil},
		{"out.nii.gz", nil},
	}
	args := func(out string, extra []string, more ...string) []string {
		a := append([]string(nil), base...)
		a[2] = out
		return append(append(a, extra...), more...)
	}
	input := stateOf(t, filepath.Join(dir, "in.raw"))
	want := map[string]string{}
	took := map[string]time.Duration{} // how long an uninterrupted run takes, per output
	for _, o := range outputs {
		start := time.Now()
		if code, errs := runProcess(t, dir, args("whole-"+o.name, o.extra)...); code != 0 {
			t.Fatalf("uninterrupted run: exit %d: %s", code, errs)
		}
		took[o.name] = time.Since(start)
		want[o.name] = digest(t, filepath.Join(dir, "whole-"+o.name))
	}
	t.Logf("uninterrupted runs take %v", took)

	rng := rand.New(rand.NewPCG(3, 4))
	const trials = 24
	var resumedFrom []int
	for trial := 0; trial < trials; trial++ {
		o := outputs[trial%len(outputs)]
		final := filepath.Join(dir, strings.TrimSuffix(o.name, "/"))
		// kill runs the command and kills it after a random time within a typical run.
		kill := func(more ...string) (finished bool) {
			cmd := tripassProcess(t, dir, args(o.name, o.extra, more...)...)
			cmd.Env = append(cmd.Env, "TRIPASS_TEST_CHECKPOINT_BYTES=2097152") // every 8 slices
			if err := cmd.Start(); err != nil {
				t.Fatal(err)
			}
			time.Sleep(time.Duration(rng.Int64N(int64(took[o.name]))))
			cmd.Process.Signal(syscall.SIGKILL)
			cmd.Wait()
			finished = cmd.ProcessState.Exited() && cmd.ProcessState.ExitCode() == 0
			if exists(final) {
				// Only a finished run (or one killed after its last rename) may leave
				// the final name, and then the output is complete.
				if digest(t, final) != want[o.name] {
					t.Fatalf("trial %d: %s exists after a kill (args %v) but is not the complete output: %s", trial, o.name, more,
						firstDifference(filepath.Join(dir, "whole-"+o.name), final))
				}
				return true
			}
			return finished
		}
		if kill() {
			os.RemoveAll(final)
			resumedFrom = append(resumedFrom, -1)
			continue
		}
		journal := journalPath(final)
		done := -1
		if j, err := readJournal(journal); err == nil {
			done = j.Done
		}
		resumedFrom = append(resumedFrom, done)
		if trial%2 == 1 && done >= 0 {
			if kill("--resume") {
				if digest(t, final) != want[o.name] {
					t.Fatalf("trial %d: resumed run left a wrong output", trial)
				}
				os.RemoveAll(final)
				continue
			}
		}
		code, errs := runProcess(t, dir, args(o.name, o.extra, "--resume")...)
		if code == ExitUsage && strings.Contains(errs, "no interrupted run to resume") {
			// Killed before its first journal: nothing durable to resume from.
			code, errs = runProcess(t, dir, args(o.name, o.extra)...)
		}
		if code != 0 {
			t.Fatalf("trial %d (%s, %d slices durable): resume: exit %d: %s", trial, o.name, done, code, errs)
		}
		if digest(t, final) != want[o.name] {
			t.Fatalf("trial %d (%s, resumed after %d slices): output differs from an uninterrupted run: %s", trial, o.name, done,
				firstDifference(filepath.Join(dir, "whole-"+o.name), final))
		}
		if exists(journal) || exists(partPath(final)) {
			t.Fatalf("trial %d: journal or partial output left after a finished run", trial)
		}
		os.RemoveAll(final)
	}
	t.Logf("slices durable at each kill (-1: no journal yet or finished): %v", resumedFrom)
	mid := 0
	for _, d := range resumedFrom {
		if d > 0 {
			mid++
		}
	}
	// Kills are timed from one uninterrupted run of each output; on a loaded machine
	// many can come too early or too late, but some must find slices to resume from.
	if mid == 0 {
		t.Errorf("no kill of %d found slices to resume from; the trials did not test resuming", trials)
	}
	if got := stateOf(t, filepath.Join(dir, "in.raw")); got != input {
		t.Fatal("the input changed")
	}
}

// TestInterruptAndResume stops runs with SIGINT and SIGTERM once some slices are
// durable: the run must end with ExitInterrupted and a one-line message that says how
// to resume, keep its partial output and journal, leave nothing under the final name,
// and --resume must finish it byte-identical to an uninterrupted run.
func TestInterruptAndResume(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the command as a process")
	}
	dir := t.TempDir()
	raw := writeRawFloat32(t, filepath.Join(dir, "in.raw"), 256, 256, 128)
	args := func(out string, more ...string) []string {
		return append(append([]string{"smooth", "in.raw", out, "--sigma", "2", "--threads", "1", "-q"}, raw...), more...)
	}
	if code, errs := runProcess(t, dir, args("whole.tif")...); code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	want := digest(t, filepath.Join(dir, "whole.tif"))
	for _, sig := range []os.Signal{os.Interrupt, syscall.SIGTERM} {
		out := filepath.Join(dir, "out.tif")
		cmd := tripassProcess(t, dir, args("out.tif")...)
		var errb bytes.Buffer
		cmd.Stderr = &errb
		if err := cmd.Start(); err != nil {
			t.Fatal(err)
		}
		// Wait for a first durable slice (the journal is written at the start with none).
		deadline := time.Now().Add(10 * time.Second)
		for time.Now().Before(deadline) {
			if j, err := readJournal(journalPath(out)); err == nil && j.Done > 0 {
				break
			}
			time.Sleep(5 * time.Millisecond)
		}
		cmd.Process.Signal(sig)
		cmd.Wait()
		if code := cmd.ProcessState.ExitCode(); code != ExitInterrupted {
			t.Fatalf("%v: exit %d, want %d: %s", sig, code, ExitInterrupted, errb.String())
		}
		msg := errb.String()
		if strings.Count(msg, "\n") != 1 || !strings.Contains(msg, "--resume") || !strings.Contains(msg, "out.tif") {
			t.Fatalf("%v: want one line naming the output and --resume, got %q", sig, msg)
		}
		if exists(out) || !exists(partPath(out)) || !exists(journalPath(out)) {
			t.Fatalf("%v: want the partial output and journal kept and no final file", sig)
		}
		if code, errs := runProcess(t, dir, args("out.tif", "--resume")...); code != 0 {
			t.Fatalf("%v: resume: exit %d: %s", sig, code, errs)
		}
		if digest(t, out) != want {
			t.Fatalf("%v: resumed output differs from an uninterrupted run", sig)
		}
		os.Remove(out)
	}
}

// TestResumeRefusals: --resume refuses a journal of another run, with one line that
// says why, and a new run refuses to discard an interrupted run's work unless told to.
func TestResumeRefusals(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the command as a process")
	}
	dir := t.TempDir()
	in := filepath.Join(dir, "in.raw")
	raw := writeRawFloat32(t, in, 128, 128, 64)
	args := func(cmd, sigma string, more ...string) []string {
		a := []string{cmd, "in.raw", "out.raw", "--threads", "1", "-q"}
		if sigma != "" {
			a = append(a, "--sigma", sigma)
		}
		return append(append(a, raw...), more...)
	}
	// A partial output as an interrupted run leaves it: slices durable, journal.
	out := filepath.Join(dir, "out.raw")
	cmd := tripassProcess(t, dir, args("smooth", "2")...)
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	for i := 0; i < 2000; i++ {
		if exists(journalPath(out)) {
			break
		}
		time.Sleep(time.Millisecond)
	}
	cmd.Process.Signal(os.Interrupt)
	cmd.Wait()
	if !exists(journalPath(out)) {
		t.Fatalf("no journal after SIGINT (exit %d)", cmd.ProcessState.ExitCode())
	}
	cases := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"other sigma", args("smooth", "3", "--resume"), ExitUsage, "it was made with --sigma=2, this run has --sigma=3"},
		{"other command", args("gradient", "", "--resume"), ExitUsage, "it was made by 'tripass smooth', not 'gradient'"},
		{"other type", args("smooth", "2", "--resume", "--type", "uint16"), ExitUsage, "this run writes"},
		{"no resume", args("smooth", "2"), ExitUsage, "add --resume to continue it or --overwrite to start over"},
		{"no journal", append(args("smooth", "2", "--resume")[:0:0], "smooth", "in.raw", "other.raw", "--sigma", "2", "--resume", raw[0], raw[1], raw[2], raw[3]), ExitUsage, "no interrupted run to resume"},
	}
	for _, tc := range cases {
		code, errs := runProcess(t, dir, tc.args...)
		if code != tc.code || !strings.Contains(errs, tc.want) || strings.Count(errs, "\n") != 1 {
			t.Errorf("%s: exit %d, stderr %q; want exit %d and one line with %q", tc.name, code, errs, tc.code, tc.want)
		}
	}
	// The input changed since the partial output was made.
	later := time.Now().Add(time.Minute)
	os.Chtimes(in, later, later)
	code, errs := runProcess(t, dir, args("smooth", "2", "--resume")...)
	if code != ExitUsage || !strings.Contains(errs, "the input changed since") {
		t.Errorf("changed input: exit %d, %q", code, errs)
	}
	// --overwrite starts over.
	if code, errs := runProcess(t, dir, args("smooth", "2", "--overwrite")...); code != 0 {
		t.Fatalf("--overwrite: exit %d: %s", code, errs)
	}
	if exists(journalPath(out)) || exists(partPath(out)) {
		t.Fatal("journal or partial output left after a finished run")
	}
}

// TestFileSizeLimit runs tripass under `ulimit -f` (bash's limit in KiB), which a
// 4 MiB output passes: every run must fail with ExitIO and one line naming the output
// and the limit, leave nothing under the final name nor a partial output, and leave
// the input as it was. The Go runtime ignores SIGXFSZ, so the write returns EFBIG.
func TestFileSizeLimit(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the command as a process")
	}
	bash, err := exec.LookPath("bash")
	if err != nil {
		t.Skip("no bash to set ulimit -f with")
	}
	self, err := os.Executable()
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	raw := writeRawFloat32(t, filepath.Join(dir, "in.raw"), 128, 128, 64)
	input := stateOf(t, filepath.Join(dir, "in.raw"))
	for _, tc := range [][]string{
		{"smooth", "in.raw", "out.raw", "--sigma", "1"},
		{"smooth", "in.raw", "out.tif", "--sigma", "1"},
		{"convert", "in.raw", "out.tif", "--compress", "deflate"},
		{"convert", "in.raw", "out.raw"},
	} {
		args := append(append(append([]string{"-c", `ulimit -f 1024; exec "$0" "$@"`, self}, tc...), raw...), "-q")
		cmd := exec.Command(bash, args...)
		cmd.Dir = dir
		cmd.Env = append(os.Environ(), "TRIPASS_TEST_AS_MAIN=1")
		var errb bytes.Buffer
		cmd.Stderr = &errb
		cmd.Run()
		out := filepath.Join(dir, tc[2])
		msg := errb.String()
		if code := cmd.ProcessState.ExitCode(); code != ExitIO {
			t.Errorf("%v: exit %d, want %d (%q)", tc, code, ExitIO, msg)
		}
		if strings.Count(msg, "\n") != 1 || !strings.Contains(msg, tc[2]) || !strings.Contains(msg, "file-size limit") {
			t.Errorf("%v: want one line naming %s and the file-size limit, got %q", tc, tc[2], msg)
		}
		if exists(out) || exists(partPath(out)) || exists(journalPath(out)) {
			t.Errorf("%v: output, partial output or journal left behind", tc)
		}
	}
	if got := stateOf(t, filepath.Join(dir, "in.raw")); got != input {
		t.Fatal("the input changed")
	}
}
