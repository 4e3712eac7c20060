package main

import (
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tripass/tripass/internal/phantom"
)

// The commands that stream a stack, each with the arguments of a small run on a stack
// of 30×26×24 voxels written by the test.
func streamingRuns(stack, dir string) map[string][]string {
	return map[string][]string{
		"info":     {"info", stack, "--stats"},
		"convert":  {"convert", stack, filepath.Join(dir, "c.raw"), "--overwrite"},
		"smooth":   {"smooth", stack, filepath.Join(dir, "s.tif"), "--sigma", "1", "--overwrite"},
		"gradient": {"gradient", stack, filepath.Join(dir, "g.tif"), "--overwrite"},
		"preview":  {"preview", stack, filepath.Join(dir, "p.png"), "--overwrite"},
	}
}

// TestNoProgressOffATerminal checks that the progress bar stays out of stderr when
// stderr is not a terminal (a buffer here, as a pipe or a log file in real use).
func TestNoProgressOffATerminal(t *testing.T) {
	dir := t.TempDir()
	stack := writeStack(t, dir, "rock.tif", phantom.RockCore(30, 26, 24, [3]float64{6, 6, 10}, 1))
	for name, args := range streamingRuns(stack, dir) {
		t.Run(name, func(t *testing.T) {
			code, _, errs := runCLI(t, args...)
			if code != 0 {
				t.Fatalf("exit %d: %s", code, errs)
			}
			for _, bit := range []string{"\r", "slice ", "MB/s", "%|", "\x1b["} {
				if strings.Contains(errs, bit) {
					t.Errorf("stderr holds progress (%q) though it is not a terminal: %q", bit, errs)
				}
			}
			code, _, errs = runCLI(t, append(args, "--quiet")...)
			if code != 0 || errs != "" {
				t.Errorf("--quiet: exit %d, stderr %q; want nothing", code, errs)
			}
		})
	}
}

// TestJSONProgressLog checks --log json: every line on stderr is a JSON object (with
// --quiet, which silences the notes), progress lines count slices up to the total, and
// the summary gives the voxels, seconds, peak memory and, for filters, the plan.
func TestJSONProgressLog(t *testing.T) {
	dir := t.TempDir()
	stack := writeStack(t, dir, "rock.tif", phantom.RockCore(30, 26, 24, [3]float64{6, 6, 10}, 1))
	const voxels = 30 * 26 * 24
	for name, args := range streamingRuns(stack, dir) {
		t.Run(name, func(t *testing.T) {
			code, _, errs := runCLI(t, append(args, "--log", "json", "--quiet")...)
			if code != 0 {
				t.Fatalf("exit %d: %s", code, errs)
			}
			var summaries []progressLine
			lastDone, progressLines := 0, 0
			for _, line := range strings.Split(strings.TrimSpace(errs), "\n") {
				var l progressLine
				if err := json.Unmarshal([]byte(line), &l); err != nil {
					t.Fatalf("stderr line is not JSON: %q (%v)", line, err)
				}
				if l.Command != name || l.Total != 24 {
					t.Errorf("line %q: want command %q and total 24", line, name)
				}
				switch l.Event {
				case "progress":
					progressLines++
					if l.Done <= lastDone || l.Done > l.Total || l.Voxels != int64(l.Done)*30*26 {
						t.Errorf("progress line %q after done=%d", line, lastDone)
					}
					lastDone = l.Done
				case "summary":
					summaries = append(summaries, l)
				default:
					t.Errorf("unknown event in %q", line)
				}
			}
			if progressLines == 0 || lastDone != 24 {
				t.Errorf("%d progress lines ending at %d slices; want some, ending at 24", progressLines, lastDone)
			}
			if len(summaries) != 1 {
				t.Fatalf("%d summaries, want 1:\n%s", len(summaries), errs)
			}
			s := summaries[0]
			if s.Voxels != voxels || s.Complete == nil || !*s.Complete || s.Seconds < 0 {
				t.Errorf("summary %+v: want %d voxels, complete", s, voxels)
			}
			if _, err := os.Stat("/proc/self"); err == nil && s.PeakRSSBytes < 1<<20 {
				t.Errorf("summary peak memory %d bytes, not plausible for a Go process", s.PeakRSSBytes)
			}
			if (name == "smooth" || name == "gradient") && s.Plan == "" {
				t.Errorf("filter summary without a plan: %+v", s)
			}
		})
	}
}

// TestJSONProgressIsThrottled checks that a long run logs at most a few lines a second,
// not one per slice.
func TestJSONProgressIsThrottled(t *testing.T) {
	dir := t.TempDir()
	stack := writeStack(t, dir, "deep.tif", phantom.RockCore(16, 16, 600, [3]float64{6, 6, 10}, 1))
	code, _, errs := runCLI(t, "info", stack, "--stats", "--log", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(errs), "\n")
	var sum progressLine
	if err := json.Unmarshal([]byte(lines[len(lines)-1]), &sum); err != nil || sum.Event != "summary" {
		t.Fatalf("last line %q is not the summary", lines[len(lines)-1])
	}
	// First slice, at most one line per interval, and the last slice.
	most := 2 + int(sum.Seconds/jsonInterval.Seconds()) + 1
	if n := len(lines) - 1; n > most {
		t.Errorf("%d progress lines in %.3f s for 600 slices; want at most %d", n, sum.Seconds, most)
	}
}

// TestJSONProgressOfAShard checks that a sharded run counts its own slices: task 2 of 4
// of a 24-slice stack streams 6 and ends complete.
func TestJSONProgressOfAShard(t *testing.T) {
	dir := t.TempDir()
	stack := writeStack(t, dir, "rock.tif", phantom.RockCore(30, 26, 24, [3]float64{6, 6, 10}, 1))
	code, _, errs := runCLI(t, "smooth", stack, filepath.Join(dir, "s.tif"), "--sigma", "1", "--shard", "2/4",
		"--log", "json", "--quiet")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	lines := strings.Split(strings.TrimSpace(errs), "\n")
	var sum progressLine
	if err := json.Unmarshal([]byte(lines[len(lines)-1]), &sum); err != nil || sum.Event != "summary" {
		t.Fatalf("last line %q is not the summary", lines[len(lines)-1])
	}
	if sum.Total != 6 || sum.Done != 6 || sum.Complete == nil || !*sum.Complete || sum.Voxels != 6*30*26 {
		t.Errorf("summary %+v: want 6 of 6 slices, complete", sum)
	}
}

// TestProgressBarOnATerminal runs a filter under util-linux's script(1), which gives
// it a terminal, and checks the bar is drawn there: slices done, MB/s and time.
func TestProgressBarOnATerminal(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command")
	}
	scriptCmd, err := exec.LookPath("script")
	if err != nil {
		t.Skip("no script(1) to provide a terminal")
	}
	bin := buildTripass(t)
	dir := t.TempDir()
	stack := writeStack(t, dir, "rock.tif", phantom.RockCore(30, 26, 24, [3]float64{6, 6, 10}, 1))
	run := func(extra string) string {
		line := bin + " smooth " + stack + " " + filepath.Join(dir, "s.tif") + " --sigma 1 --overwrite" + extra
		out, err := exec.Command(scriptCmd, "-qec", line, "/dev/null").CombinedOutput()
		if err != nil {
			t.Fatalf("%s: %v\n%s", line, err, out)
		}
		return string(out)
	}
	out := run("")
	for _, want := range []string{"smooth: slice 24/24", "100%", "MB/s", "wrote "} {
		if !strings.Contains(out, want) {
			t.Errorf("terminal output lacks %q:\n%q", want, out)
		}
	}
	if out := run(" --quiet"); strings.Contains(out, "slice") || strings.Contains(out, "wrote") {
		t.Errorf("--quiet on a terminal still printed %q", out)
	}
	if out := run(" --log json --quiet"); !strings.Contains(out, `"event":"summary"`) || strings.Contains(out, "MB/s)") {
		t.Errorf("--log json on a terminal: %q; want JSON lines and no bar", out)
	}
}
