package main

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"time"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/io/nifti"
	"github.com/tripass/tripass/tensor"
	"github.com/tripass/tripass/volume"
)

// flagResume continues an interrupted run. It is one of the output flags, so every
// streaming command has it.
var flagResume = &cli.BoolFlag{
	Name:     "resume",
	Category: "Output",
	Usage: "continue an interrupted or killed run of the same command from its last durable slice " +
		"(the result is identical to an uninterrupted run)",
}

// A run journal sits beside the partial output of a streaming run and says how much of
// it is durable and what run it belongs to, so that --resume can continue it and
// refuse to continue it with another input or other parameters. It is JSON of our own
// design, replaced atomically (written beside, synced, renamed) after the slices it
// counts were synced, so that after a crash at any moment it never claims more than the
// partial output holds.
type journal struct {
	Kind    string `json:"kind"`    // journalKind
	Version int    `json:"version"` // journalVersion
	Command string `json:"command"`
	// Params are the command's flags that shape the output, "--name=value" in a fixed
	// order, and "plans=<sha256>" for the kernels and options the engine runs.
	Params []string       `json:"params"`
	Input  inputPrint     `json:"input"`
	Output outputSettings `json:"output"`
	// First, Last are the output slice range of the run, [First, Last).
	First int `json:"first_slice"`
	Last  int `json:"end_slice"`
	// Done counts the slices from First that are durable in the partial output; Bytes is
	// the partial file's length after them (0 for slice folders).
	Done    int    `json:"slices_done"`
	Bytes   int64  `json:"durable_bytes"`
	Updated string `json:"updated"`
}

const (
	journalKind    = "tripass run journal"
	journalVersion = 1
)

// inputPrint identifies an input: its absolute path, size, modification time and
// header. For a slice folder, size and time are the sum and the latest of its files'.
type inputPrint struct {
	Path    string `json:"path"`
	Size    int64  `json:"size"`
	ModTime string `json:"mtime"`
	Header  string `json:"header"`
}

// outputSettings describe the output file as a whole.
type outputSettings struct {
	Path   string `json:"path"`
	Layout string `json:"layout"`
	Header string `json:"header"`
}

// journalPath is the journal of the output target: ".tripass-part-<name>.journal"
// beside it.
func journalPath(target string) string {
	target = filepath.Clean(strings.TrimRight(target, "/"))
	return filepath.Join(filepath.Dir(target), atomicfile.TempPrefix+filepath.Base(target)+".journal")
}

// partPath is where the partial output of target is kept.
func partPath(target string) string {
	return atomicfile.PartName(strings.TrimRight(target, "/"))
}

// newJournal describes the run of j from c, with nothing done yet.
func newJournal(c *cli.Context, j *streamJob) (*journal, error) {
	ip, err := fingerprintInput(j.inPath, j.in.Header())
	if err != nil {
		return nil, err
	}
	k, _ := kindOf(j.outPath) // checked when the output was named
	abs, _ := filepath.Abs(j.outPath)
	return &journal{
		Kind:    journalKind,
		Version: journalVersion,
		Command: commandName(c),
		Params:  runParams(c, j),
		Input:   ip,
		Output:  outputSettings{Path: abs, Layout: k.String(), Header: headerString(j.outH)},
		First:   j.z0,
		Last:    j.z1,
	}, nil
}

func headerString(h volume.Header) string {
	return fmt.Sprintf("%d×%d×%d %s spacing %g,%g,%g %s", h.NX, h.NY, h.NZ, h.Type,
		h.Spacing[0], h.Spacing[1], h.Spacing[2], unitOrVoxels(h.Unit))
}

func unitOrVoxels(u string) string {
	if u == "" {
		return "voxels"
	}
	return u
}

// fingerprintInput identifies the input at path, whose header (as the run sees it) is h.
func fingerprintInput(path string, h volume.Header) (inputPrint, error) {
	abs, err := filepath.Abs(path)
	if err != nil {
		return inputPrint{}, err
	}
	if r, err := filepath.EvalSymlinks(abs); err == nil {
		abs = r
	}
	st, err := os.Stat(abs)
	if err != nil {
		return inputPrint{}, ioError(err)
	}
	size, mod := st.Size(), st.ModTime()
	if st.IsDir() {
		size = 0
		ents, err := os.ReadDir(abs)
		if err != nil {
			return inputPrint{}, ioError(err)
		}
		for _, e := range ents {
			if strings.HasPrefix(e.Name(), ".") || e.IsDir() {
				continue
			}
			fi, err := e.Info()
			if err != nil {
				continue
			}
			size += fi.Size()
			if fi.ModTime().After(mod) {
				mod = fi.ModTime()
			}
		}
	}
	return inputPrint{Path: abs, Size: size, ModTime: mod.UTC().Format(time.RFC3339Nano), Header: headerString(h)}, nil
}

// paramsIgnored are flags that do not change the output: a resumed run may differ in
// them (FilterRange gives the same slices for any thread count).
var paramsIgnored = map[string]bool{
	"resume": true, "overwrite": true, "threads": true, "quiet": true, "log": true, "help": true,
}

// runParams lists the flags of c's command that shape the output, with their values
// (defaults included, so that a changed default is noticed too), and a digest of the
// plans and options the engine runs, which covers kernel files whose content changed.
func runParams(c *cli.Context, j *streamJob) []string {
	var ps []string
	if c.Command != nil {
		for _, f := range c.Command.Flags {
			name := f.Names()[0]
			if paramsIgnored[name] {
				continue
			}
			ps = append(ps, fmt.Sprintf("--%s=%v", name, c.Value(name)))
		}
	}
	sort.Strings(ps)
	if j.plans != nil {
		ps = append(ps, "plans="+planDigest(j.plans, j.combine, j.opt))
	}
	return ps
}

// planDigest is a SHA-256 of everything the engine's output depends on besides the
// input: every plan's form, kernel and passes, the combination and the edge options.
func planDigest(plans []*tensor.Plan, combine volume.Combine, opt volume.FilterOptions) string {
	h := sha256.New()
	put := func(vs ...float64) {
		var b [8]byte
		for _, v := range vs {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(v))
			h.Write(b[:])
		}
	}
	lens := func(n int) { put(float64(n)) }
	put(float64(combine), float64(opt.Edge), opt.Fill)
	lens(len(opt.Scale))
	put(opt.Scale...)
	for _, p := range plans {
		put(float64(p.Form), float64(p.Order))
		if p.Kernel != nil {
			put(float64(p.Kernel.I), float64(p.Kernel.J), float64(p.Kernel.K))
			lens(len(p.Kernel.Data))
			put(p.Kernel.Data...)
		}
		lens(len(p.Branches))
		for _, b := range p.Branches {
			lens(len(b.First))
			put(b.First...)
			lens(len(b.Leaves))
			for _, l := range b.Leaves {
				lens(len(l.Second))
				put(l.Second...)
				lens(len(l.Z))
				put(l.Z...)
			}
		}
	}
	return hex.EncodeToString(h.Sum(nil))[:32]
}

// readJournal reads the journal at path; a missing journal is os.ErrNotExist.
func readJournal(path string) (*journal, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var j journal
	if err := json.Unmarshal(b, &j); err != nil || j.Kind != journalKind {
		return nil, fmt.Errorf("%s: not a tripass run journal", path)
	}
	if j.Version != journalVersion {
		return nil, fmt.Errorf("%s: run journal version %d, this tripass writes version %d", path, j.Version, journalVersion)
	}
	if j.Done < 0 || j.Bytes < 0 || j.First < 0 || j.Last < j.First || j.Done > j.Last-j.First {
		return nil, fmt.Errorf("%s: damaged run journal (%d slices done of [%d, %d))", path, j.Done, j.First, j.Last)
	}
	return &j, nil
}

// write replaces the journal at path atomically.
func (j *journal) write(path string) error {
	j.Updated = time.Now().UTC().Format(time.RFC3339)
	b, err := json.MarshalIndent(j, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteFileAtomic(path, append(b, '\n'))
}

// mismatch explains, in a few words, why the run described by now cannot continue the
// partial output described by old; "" when it can.
func (old *journal) mismatch(now *journal) string {
	switch {
	case old.Command != now.Command:
		return fmt.Sprintf("it was made by 'tripass %s', not '%s'", old.Command, now.Command)
	case old.Input.Path != now.Input.Path:
		return fmt.Sprintf("it was made from %s, not %s", old.Input.Path, now.Input.Path)
	case old.Input.Size != now.Input.Size:
		return fmt.Sprintf("the input changed since (%d bytes then, %d now)", old.Input.Size, now.Input.Size)
	case old.Input.ModTime != now.Input.ModTime:
		return fmt.Sprintf("the input changed since (modified %s then, %s now)", old.Input.ModTime, now.Input.ModTime)
	case old.Input.Header != now.Input.Header:
		return fmt.Sprintf("the input was read as %s then, %s now", old.Input.Header, now.Input.Header)
	case old.Output.Layout != now.Output.Layout || old.Output.Header != now.Output.Header:
		return fmt.Sprintf("it is a %s of %s, this run writes a %s of %s", old.Output.Layout, old.Output.Header, now.Output.Layout, now.Output.Header)
	case old.First != now.First || old.Last != now.Last:
		return fmt.Sprintf("it holds output slices [%d, %d), this run makes [%d, %d)", old.First, old.Last, now.First, now.Last)
	}
	if d := paramDiff(old.Params, now.Params); d != "" {
		return d
	}
	return ""
}

// paramDiff names the first parameter that differs between two runs.
func paramDiff(old, now []string) string {
	split := func(ps []string) map[string]string {
		m := make(map[string]string, len(ps))
		for _, p := range ps {
			k, v, _ := strings.Cut(p, "=")
			m[k] = v
		}
		return m
	}
	o, n := split(old), split(now)
	keys := make([]string, 0, len(o)+len(n))
	for k := range o {
		keys = append(keys, k)
	}
	for k := range n {
		if _, ok := o[k]; !ok {
			keys = append(keys, k)
		}
	}
	sort.Strings(keys)
	for _, k := range keys {
		ov, okO := o[k]
		nv, okN := n[k]
		switch {
		case k == "plans" && ov != nv:
			return "the kernels or edge options differ from the earlier run's"
		case !okO:
			return fmt.Sprintf("this run has %s=%s, which the earlier run did not know", k, nv)
		case !okN:
			return fmt.Sprintf("the earlier run had %s=%s, which this run does not know", k, ov)
		case ov != nv:
			return fmt.Sprintf("it was made with %s=%s, this run has %s=%s", k, ov, k, nv)
		}
	}
	return ""
}

// errNoJournal is returned for --resume when there is no interrupted run to continue.
var errNoJournal = errors.New("no interrupted run to resume")

// resumablePath reports whether the output at path can be continued after an
// interruption. Every layout tripass writes can (io/nifti's Resumable says so for
// NIfTI); a layout that could not would be written again from the start.
func resumablePath(path string) bool {
	k, err := kindOf(path)
	return err == nil && (k != kindNIfTI || nifti.Resumable(path))
}

// runJournal is the journal of one run and the lock on its output.
type runJournal struct {
	jr     *journal // Done and Bytes say where the run starts
	path   string
	unlock func()
}

// openJournal locks the job's output and prepares its journal. With --resume it reads
// the journal an interrupted run left and checks that this run is the same run; without,
// it refuses to discard an interrupted run's partial output unless --overwrite is given.
func (j *streamJob) openJournal(c *cli.Context) (*runJournal, error) {
	jr, err := newJournal(c, j)
	if err != nil {
		return nil, err
	}
	unlock, err := lockOutput(j.outPath)
	if err != nil {
		return nil, err
	}
	rs := &runJournal{jr: jr, path: journalPath(j.outPath), unlock: unlock}
	if !resumablePath(j.outPath) {
		if c.Bool(flagResume.Name) {
			note(c, "%s: this kind of output cannot be continued; --resume starts it over", j.outPath)
		}
		return rs, nil
	}
	old, err := readJournal(rs.path)
	switch {
	case err != nil && !errors.Is(err, os.ErrNotExist):
		if c.Bool(flagResume.Name) {
			unlock()
			return nil, inputError(fmt.Errorf("%s: cannot resume: %w", j.outPath, err))
		}
	case c.Bool(flagResume.Name) && err != nil:
		unlock()
		return nil, usageErrorf("%s: --resume: %v (no journal %s)", j.outPath, errNoJournal, rs.path)
	case c.Bool(flagResume.Name):
		if why := old.mismatch(jr); why != "" {
			unlock()
			return nil, usageErrorf("%s: cannot resume the partial output %s: %s (run without --resume and with --overwrite to start over)",
				j.outPath, partPath(j.outPath), why)
		}
		jr.Done, jr.Bytes = old.Done, old.Bytes
	case err == nil && !c.Bool(flagOverwrite.Name):
		unlock()
		return nil, usageErrorf("%s: an interrupted run left %d of %d slices in %s; add --resume to continue it or --overwrite to start over",
			j.outPath, old.Done, old.Last-old.First, partPath(j.outPath))
	}
	if jr.Done == 0 {
		// Starting over: the old journal must not outlive the partial output it
		// describes, which the new run replaces.
		if err := os.Remove(rs.path); err != nil && !errors.Is(err, os.ErrNotExist) {
			unlock()
			return nil, ioError(err)
		}
	}
	return rs, nil
}

// release unlocks the output. It is safe on a nil runJournal.
func (rs *runJournal) release() {
	if rs != nil && rs.unlock != nil {
		rs.unlock()
		rs.unlock = nil
	}
}

// discard removes the journal, once the output is complete or given up. It is safe on
// a nil runJournal.
func (rs *runJournal) discard() {
	if rs != nil {
		os.Remove(rs.path)
	}
}
