package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"runtime"
	"strings"
	"time"

	"github.com/schollz/progressbar/v3"
	"github.com/urfave/cli/v2"
	"golang.org/x/term"

	"github.com/tripass/tripass/volume"
)

var flagQuiet = &cli.BoolFlag{
	Name:     "quiet",
	Aliases:  []string{"q"},
	Category: "Messages",
	Usage:    "print no progress bar and no notes on stderr (errors still go there; --log json still logs)",
}

// flagLog picks how progress is reported. It is shared by every command that streams a
// stack, like flagQuiet.
var flagLog = &cli.StringFlag{
	Name:     "log",
	Category: "Messages",
	Value:    "text",
	Usage: "progress on stderr as `FORMAT`: text (a bar with slices, MB/s and time left, on a " +
		"terminal only) or json (JSON Lines for batch logs: a few progress lines a second and " +
		"a summary with voxels, seconds, peak memory and plan; also in pipes and with --quiet)",
	Action: func(c *cli.Context, v string) error {
		if _, err := parseLogFormat(v); err != nil {
			return usageErrorf("--log: %v", err)
		}
		return nil
	},
}

type logFormat int

const (
	logText logFormat = iota
	logJSON
)

func parseLogFormat(s string) (logFormat, error) {
	switch strings.ToLower(strings.TrimSpace(s)) {
	case "", "text":
		return logText, nil
	case "json":
		return logJSON, nil
	}
	return logText, fmt.Errorf("%q: want text or json", s)
}

// jsonInterval is the least time between two JSON progress lines: a few a second is
// enough for a batch log and keeps it small.
const jsonInterval = 250 * time.Millisecond

// progress reports how a stack streams through a command: on a terminal a bar on stderr
// (slices done, MB/s, time left) drawn by progressbar; with --log json, JSON Lines on
// stderr for batch systems. Commands call update after each slice and done at the end.
type progress struct {
	w           io.Writer
	command     string // the command's name, as typed after tripass
	label       string // what streams, when a command streams more than one stack
	total       int
	sliceBytes  int64
	sliceVoxels int64
	start, last time.Time
	bar         *progressbar.ProgressBar
	json        *json.Encoder
	n, lastDone int
	ended       bool
	plan        string // the filter plan, for the summary; set by the command if it has one
}

// newProgress starts reporting the streaming of a volume of header h. label names
// what streams ("smooth", "preview before.tif").
func newProgress(c *cli.Context, label string, h volume.Header) *progress {
	p := &progress{
		w:           c.App.ErrWriter,
		command:     commandName(c),
		label:       label,
		total:       h.NZ,
		sliceBytes:  int64(h.SliceBytes()),
		sliceVoxels: int64(h.SliceLen()),
		start:       time.Now(),
	}
	format, _ := parseLogFormat(c.String(flagLog.Name))
	switch {
	case format == logJSON:
		p.json = json.NewEncoder(p.w)
	case !c.Bool(flagQuiet.Name) && isTerminal(p.w):
		p.bar = progressbar.NewOptions64(h.Bytes(),
			progressbar.OptionSetWriter(p.w),
			progressbar.OptionSetDescription(p.describe(0)),
			progressbar.OptionShowBytes(true),
			progressbar.OptionSetPredictTime(true),
			progressbar.OptionSetWidth(24),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionShowElapsedTimeOnFinish(),
			progressbar.OptionOnCompletion(func() { fmt.Fprintln(p.w) }),
		)
	}
	return p
}

func commandName(c *cli.Context) string {
	if c.Command != nil && c.Command.Name != "" {
		return c.Command.FullName()
	}
	return c.App.Name
}

func (p *progress) describe(done int) string {
	return fmt.Sprintf("%s: slice %d/%d", p.label, done, p.total)
}

// isTerminal reports whether w is a terminal (not a file, a pipe or /dev/null).
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

// update reports that done slices of the total are finished.
func (p *progress) update(done int) {
	if p.ended || done == p.lastDone {
		return
	}
	p.lastDone = done
	switch {
	case p.bar != nil:
		p.bar.Describe(p.describe(done))
		p.bar.Set64(int64(done) * p.sliceBytes)
	case p.json != nil:
		now := time.Now()
		if done < p.total && now.Sub(p.last) < jsonInterval {
			return
		}
		p.last = now
		p.emit(progressLine{Event: "progress", Command: p.command, Label: p.label, Done: done, Total: p.total})
	}
}

// resize says that the run streams total slices, not the whole stack: a shard, or a
// range of it. Call it before the first update.
func (p *progress) resize(total int) {
	if total <= 0 || total == p.total {
		return
	}
	p.total = total
	if p.bar != nil {
		p.bar.ChangeMax64(int64(total) * p.sliceBytes)
		p.bar.Describe(p.describe(0))
	}
}

// progressLine is one JSON progress line, and the figures of the summary.
type progressLine struct {
	Event        string  `json:"event"` // "progress" or "summary"
	Command      string  `json:"command"`
	Label        string  `json:"label,omitempty"`
	Done         int     `json:"done"`  // slices
	Total        int     `json:"total"` // slices
	Percent      float64 `json:"percent"`
	Seconds      float64 `json:"seconds"`
	MBPerS       float64 `json:"mb_per_s"`     // input megabytes (10^6 bytes) per second
	MVoxelPerS   float64 `json:"mvoxel_per_s"` // input megavoxels per second
	SecondsLeft  float64 `json:"seconds_left"` // a linear estimate; 0 at the end
	Voxels       int64   `json:"voxels"`       // voxels streamed so far
	Bytes        int64   `json:"bytes"`        // input bytes streamed so far
	PeakRSSBytes uint64  `json:"peak_rss_bytes,omitempty"`
	GoSysBytes   uint64  `json:"go_sys_bytes,omitempty"`
	Plan         string  `json:"plan,omitempty"`
	Complete     *bool   `json:"complete,omitempty"`
	Host         string  `json:"host,omitempty"`
}

func (p *progress) emit(l progressLine) {
	el := time.Since(p.start).Seconds()
	l.Seconds = round3(el)
	l.Voxels = int64(l.Done) * p.sliceVoxels
	l.Bytes = int64(l.Done) * p.sliceBytes
	l.Percent = round3(100 * float64(l.Done) / float64(max(p.total, 1)))
	if el > 0 {
		l.MBPerS = round3(float64(l.Bytes) / el / 1e6)
		l.MVoxelPerS = round3(float64(l.Voxels) / el / 1e6)
	}
	if l.Done > 0 && l.Done < p.total {
		l.SecondsLeft = round3(el / float64(l.Done) * float64(p.total-l.Done))
	}
	p.json.Encode(l)
}

func round3(v float64) float64 { return math.Round(v*1000) / 1000 }

// done ends the report: the bar is completed (or left where a failure stopped it) and,
// with --log json, a summary line gives the voxels streamed, the seconds, the peak
// memory of the process and the plan. Calling it again does nothing.
func (p *progress) done() {
	if p.ended {
		return
	}
	p.ended = true
	switch {
	case p.bar != nil:
		if p.lastDone >= p.total {
			p.bar.Finish()
		} else {
			p.bar.Exit()
			fmt.Fprintln(p.w)
		}
	case p.json != nil:
		var ms runtime.MemStats
		runtime.ReadMemStats(&ms)
		complete := p.lastDone >= p.total
		host, _ := os.Hostname()
		p.emit(progressLine{Event: "summary", Command: p.command, Label: p.label, Done: p.lastDone,
			Total: p.total, PeakRSSBytes: peakRSS(), GoSysBytes: ms.Sys, Plan: p.plan,
			Complete: &complete, Host: host})
	}
}

// progressSource counts slices as they are read.
type progressSource struct {
	volume.Source
	p *progress
}

func (s progressSource) ReadSlice(dst *volume.Slice) error {
	err := s.Source.ReadSlice(dst)
	if err == nil {
		s.p.update(s.p.count())
	}
	return err
}

func (p *progress) count() int {
	p.n++
	return p.n
}
