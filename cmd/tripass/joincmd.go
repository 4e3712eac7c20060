package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/io/tiffstack"
	"github.com/tripass/tripass/volume"
)

var joinCommand = &cli.Command{
	Name:      "join",
	Usage:     "assemble the part files of a sharded job into its output, checking them first",
	ArgsUsage: "[PARTS...] OUT",
	Description: `The tasks of a job run with --shard I/N and a file output OUT (.tif, .raw, .nii,
.nii.gz) each write a part file OUT.part-I-of-N.tif. 'tripass join OUT' finds OUT's
parts beside it; 'tripass join PARTS... OUT' takes them as listed (in any order), and
OUT may then be of another format than the tasks were given (a folder, say).
Before writing anything, join checks that every part is readable and holds the slices
its record says, that all come from one job (same input, command, parameters and
number of tasks), and that together they cover every output slice exactly once. It
then streams the parts in order into OUT, written exactly as a whole run would have
written it (same format, compression, byte order), so the result is byte for byte
the whole run's; a TIFF OUT takes the parts' compressed strips as they are. OUT
appears only when complete. Tasks with no slices (more tasks than slices) leave no
part and none is expected.

For a folder OUT, where the tasks wrote their slice files in place, 'tripass join OUT/'
checks that the folder holds every slice of the job and no other, then removes the
job's record and any temporary file a killed task left in the folder.

Examples:
   tripass join core-smooth.tif
   tripass join parts/core.tif.part-*.tif core-smooth.tif --delete-parts
   tripass join smooth-slices/`,
	Flags: []cli.Flag{
		flagOverwrite, flagQuiet, flagLog,
		&cli.BoolFlag{Name: "delete-parts", Category: "Output", Usage: "remove the part files once OUT is complete"},
		// The output settings come from the parts' record, so that OUT is written as the
		// whole run would have written it; createOutput reads them from these hidden flags.
		&cli.StringFlag{Name: flagCompress.Name, Hidden: true, Value: "none", Usage: "set from the parts' record"},
		&cli.BoolFlag{Name: flagBigTIFF.Name, Hidden: true, Usage: "set from the parts' record"},
		&cli.StringFlag{Name: flagRawEndian.Name, Hidden: true, Value: "little", Usage: "set from the parts' record"},
	},
	Action: joinAction,
}

func init() { register(joinCommand) }

// A part is one task's part file, open, with its record.
type part struct {
	path string
	r    *tiffstack.Reader
	rec  shardRecord
}

func joinAction(c *cli.Context) error {
	args := c.Args().Slice()
	if len(args) == 0 {
		return usageErrorf("join takes OUT, or PARTS... OUT")
	}
	out := args[len(args)-1]
	k, err := kindOf(out)
	if err != nil {
		return err
	}
	if k == kindFolder && len(args) == 1 {
		return joinFolder(c, out)
	}
	paths := args[:len(args)-1]
	if len(paths) == 0 {
		if paths, err = findParts(out); err != nil {
			return err
		}
	}
	for _, p := range paths {
		if samePath(p, out) {
			return usageErrorf("%s: the output is also a part; choose another output name", out)
		}
	}
	if _, err := os.Lstat(out); err == nil && !c.Bool(flagOverwrite.Name) {
		return usageErrorf("%s: output already exists (use --overwrite to replace it)", out)
	}
	parts, err := openParts(paths)
	defer func() {
		for _, p := range parts {
			p.r.Close()
		}
	}()
	if err != nil {
		return err
	}
	rec := parts[0].rec
	h, _ := rec.header()
	// Write OUT with the whole run's settings (see the hidden flags above).
	for name, v := range map[string]string{
		flagCompress.Name: rec.Target.Compress, flagBigTIFF.Name: strconv.FormatBool(rec.Target.BigTIFF),
		flagRawEndian.Name: rec.Target.RawEndian,
	} {
		if err := c.Set(name, v); err != nil {
			return inputError(fmt.Errorf("%s: record: %s %q: %w", parts[0].path, name, v, err))
		}
	}
	sink, err := createOutput(c, out, h, outputOptions{Orientation: rec.Orientation}, paths...)
	if err != nil {
		return err
	}
	p := newProgress(c, "join", h)
	err = copyParts(sink, parts, h, p.update)
	p.done()
	if err != nil {
		sink.Abort()
		return err
	}
	if err := sink.Close(); err != nil {
		sink.Abort()
		return err
	}
	note(c, "joined %d parts of %s (%d tasks) into %s: %d×%d×%d %s", len(parts), rec.Command, rec.Count, out, h.NX, h.NY, h.NZ, h.Type)
	if c.Bool("delete-parts") {
		for _, p := range parts {
			p.r.Close()
			if err := os.Remove(p.path); err != nil {
				return ioError(err)
			}
		}
	}
	return nil
}

// findParts lists the part files beside out: out.part-I-of-N.tif.
func findParts(out string) ([]string, error) {
	dir, base := filepath.Split(out)
	if dir == "" {
		dir = "."
	}
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, ioError(fmt.Errorf("%s: %w", dir, unwrapPathError(err)))
	}
	var paths []string
	for _, e := range ents {
		rest, ok := strings.CutPrefix(e.Name(), base+".part-")
		if !ok {
			continue
		}
		rest, ok = strings.CutSuffix(rest, ".tif")
		i, n, cut := strings.Cut(rest, "-of-")
		if ok && cut && allDigits(i) && allDigits(n) {
			paths = append(paths, filepath.Join(dir, e.Name()))
		}
	}
	if len(paths) == 0 {
		return nil, inputError(fmt.Errorf("%s: no part files %s.part-I-of-N.tif beside it", out, base))
	}
	return paths, nil
}

func allDigits(s string) bool {
	return s != "" && strings.Trim(s, "0123456789") == ""
}

// openParts opens every part, reads its record and checks that the parts are of one
// job and cover its output slices exactly once. It returns them in slice order; on an
// error the parts opened so far are returned too, for closing.
func openParts(paths []string) ([]*part, error) {
	var parts []*part
	for _, path := range paths {
		r, err := tiffstack.Open(path)
		if err != nil {
			return parts, inputError(fmt.Errorf("part %s is unreadable (truncated or damaged; rerun its task): %w", path, errors.Unwrap(err)))
		}
		p := &part{path: path, r: r}
		parts = append(parts, p)
		note := r.Note()
		if note == nil {
			return parts, inputError(fmt.Errorf("%s is not a part file of a sharded tripass job (its description has no record)", path))
		}
		if err := json.Unmarshal(note, &p.rec); err != nil || p.rec.Format != partFormat {
			return parts, inputError(fmt.Errorf("%s: the part's record is not a %s record", path, partFormat))
		}
		if err := checkPart(p); err != nil {
			return parts, inputError(err)
		}
	}
	first := parts[0]
	for _, p := range parts[1:] {
		if p.rec.Job != first.rec.Job {
			return parts, inputError(fmt.Errorf("%s and %s are parts of different jobs (%s in %d tasks, job %.12s; %s in %d tasks, job %.12s)",
				first.path, p.path, first.rec.Command, first.rec.Count, first.rec.Job, p.rec.Command, p.rec.Count, p.rec.Job))
		}
	}
	sort.SliceStable(parts, func(a, b int) bool { return parts[a].rec.Task < parts[b].rec.Task })
	for i := 1; i < len(parts); i++ {
		if a, b := parts[i-1], parts[i]; a.rec.Task == b.rec.Task {
			return parts, inputError(fmt.Errorf("%s and %s overlap: both hold task %d of %d (slices %d–%d); remove one",
				a.path, b.path, a.rec.Task, a.rec.Count, a.rec.Z0, a.rec.Z1-1))
		}
	}
	// Every task with slices must be there, once.
	have := make(map[int]bool, len(parts))
	for _, p := range parts {
		have[p.rec.Task] = true
	}
	var missing []string
	for t := 1; t <= first.rec.Count; t++ {
		z0, z1 := evenSplit(t, first.rec.Count, first.rec.Output.NZ)
		if z0 < z1 && !have[t] {
			missing = append(missing, fmt.Sprintf("task %d (slices %d–%d)", t, z0, z1-1))
		}
	}
	if len(missing) > 0 {
		more := ""
		if len(missing) > 3 {
			more = fmt.Sprintf(" and %d more", len(missing)-3)
			missing = missing[:3]
		}
		return parts, inputError(fmt.Errorf("parts of %s are missing: %s%s of %d; expected e.g. %s (rerun those tasks)",
			first.rec.Target.Name, strings.Join(missing, ", "), more, first.rec.Count,
			partName(first.rec.Target.Name, firstMissing(have, first.rec), first.rec.Count)))
	}
	return parts, nil
}

func firstMissing(have map[int]bool, r shardRecord) int {
	for t := 1; t <= r.Count; t++ {
		if z0, z1 := evenSplit(t, r.Count, r.Output.NZ); z0 < z1 && !have[t] {
			return t
		}
	}
	return 0
}

// checkPart checks a part against its own record: the task's range is the even split's,
// and the file holds exactly those slices, of the output's size and sample type.
func checkPart(p *part) error {
	r := p.rec
	h, err := r.header()
	if err != nil {
		return fmt.Errorf("%s: the part's record has a bad output header: %w", p.path, err)
	}
	if r.Count < 1 || r.Task < 1 || r.Task > r.Count {
		return fmt.Errorf("%s: the part's record names task %d of %d", p.path, r.Task, r.Count)
	}
	if z0, z1 := evenSplit(r.Task, r.Count, h.NZ); z0 != r.Z0 || z1 != r.Z1 {
		return fmt.Errorf("%s: the part's record says slices %d–%d, but task %d of %d holds %d–%d", p.path, r.Z0, r.Z1-1, r.Task, r.Count, z0, z1-1)
	}
	ph := p.r.Header()
	if ph.NX != h.NX || ph.NY != h.NY || ph.Type != h.Type {
		return fmt.Errorf("%s: the part's slices are %d×%d %s, its record says %d×%d %s", p.path, ph.NX, ph.NY, ph.Type, h.NX, h.NY, h.Type)
	}
	if ph.NZ != r.Z1-r.Z0 {
		return fmt.Errorf("%s holds %d slices, but task %d of %d has %d (slices %d–%d): the part is incomplete; rerun its task",
			p.path, ph.NZ, r.Task, r.Count, r.Z1-r.Z0, r.Z0, r.Z1-1)
	}
	return nil
}

// pageCopier is a TIFF writer that can take a part's page as it is
// (tiffstack.Writer.CopyPage): strips laid out as it would write them are copied
// without being decoded and compressed again.
type pageCopier interface {
	CopyPage(r *tiffstack.Reader, z int) (ok bool, err error)
}

// copyParts streams the parts' slices, in order, into dst, copying pages whose layout
// is already OUT's.
func copyParts(dst volume.SliceWriter, parts []*part, h volume.Header, progress func(int)) error {
	var pc pageCopier
	if o, ok := dst.(*output); ok {
		pc, _ = o.Sink.(pageCopier)
	}
	s := volume.NewSlice(h.NX, h.NY, h.Type)
	done := 0
	for _, p := range parts {
		for z := p.rec.Z0; z < p.rec.Z1; z++ {
			if pc != nil {
				ok, err := pc.CopyPage(p.r, z-p.rec.Z0)
				if err != nil {
					if strings.Contains(err.Error(), p.path) { // reading the part
						return inputError(fmt.Errorf("part %s: slice %d: %w", p.path, z, err))
					}
					return ioError(err) // writing OUT
				}
				if ok {
					done++
					progress(done)
					continue
				}
				if err := p.r.SeekSlice(z - p.rec.Z0); err != nil {
					return inputError(err)
				}
			}
			if err := p.r.ReadSlice(s); err != nil {
				if err == io.EOF {
					err = io.ErrUnexpectedEOF
				}
				return inputError(fmt.Errorf("part %s: slice %d: %w", p.path, z, err))
			}
			if err := dst.WriteSlice(s); err != nil {
				return err
			}
			done++
			progress(done)
		}
	}
	return nil
}

// joinFolder checks a folder filled by the tasks of one job: its record, and every
// slice file of the job present and readable, with no others. Then it removes the record.
func joinFolder(c *cli.Context, out string) error {
	dir := strings.TrimRight(out, "/")
	recPath := filepath.Join(dir, shardRecordName)
	rec, err := readFolderRecord(recPath)
	if errors.Is(err, os.ErrNotExist) {
		return inputError(fmt.Errorf("%s: no record of a sharded job in the folder (%s); nothing to check", dir, shardRecordName))
	}
	if err != nil {
		return inputError(fmt.Errorf("%s: %w", recPath, err))
	}
	h, err := rec.header()
	if err != nil {
		return inputError(fmt.Errorf("%s: bad output header: %w", recPath, err))
	}
	var missing []string
	for z := 0; z < h.NZ; z++ {
		if _, err := os.Stat(filepath.Join(dir, tiffstack.FolderSliceName(h.NZ, z))); err != nil {
			missing = append(missing, strconv.Itoa(z))
		}
	}
	if len(missing) > 0 {
		n := len(missing)
		if n > 5 {
			missing = append(missing[:5], "…")
		}
		return inputError(fmt.Errorf("%s: %d of %d slices are missing (%s); rerun the tasks that write them", dir, n, h.NZ, strings.Join(missing, ", ")))
	}
	fr, err := tiffstack.OpenFolder(dir)
	if err != nil {
		return inputError(fmt.Errorf("%s: %w", dir, err))
	}
	fh := fr.Header()
	if fh.NZ != h.NZ || fh.NX != h.NX || fh.NY != h.NY || fh.Type != h.Type {
		return inputError(fmt.Errorf("%s holds %d×%d×%d %s, the job writes %d×%d×%d %s (files of another run left in the folder?)",
			dir, fh.NX, fh.NY, fh.NZ, fh.Type, h.NX, h.NY, h.NZ, h.Type))
	}
	if err := os.Remove(recPath); err != nil {
		return ioError(err)
	}
	// Temporary files of tasks that were killed while writing a slice (their reruns
	// wrote the slice anew) are of no use now.
	stale := 0
	if ents, err := os.ReadDir(dir); err == nil {
		for _, e := range ents {
			if strings.HasPrefix(e.Name(), atomicfile.TempPrefix) && !e.IsDir() && os.Remove(filepath.Join(dir, e.Name())) == nil {
				stale++
			}
		}
	}
	msg := ""
	if stale > 0 {
		msg = fmt.Sprintf("; removed %d temporary files of interrupted tasks", stale)
	}
	note(c, "%s: complete: %d slices of %s (%d tasks), %d×%d %s%s", dir, h.NZ, rec.Command, rec.Count, h.NX, h.NY, h.Type, msg)
	return nil
}
