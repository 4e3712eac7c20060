package main

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/io/nifti"
	"github.com/tripass/tripass/io/tiffstack"
	"github.com/tripass/tripass/volume"
)

// Shards: one streaming job split along z into N independent tasks that a batch
// scheduler runs wherever it likes (Slurm job arrays, Kubernetes Indexed Jobs), with no
// coordinator of our own. Task I of N computes output slices [z0, z1) of an even split
// through streamJob's output range (volume.FilterRange reads only the range and the
// kernels' halo, with the whole run's edge handling), so the union of the tasks'
// outputs is the whole run's output bit for bit.
//
// Outputs. A slice folder is filled in place: each task writes its own slice files
// (the names a whole run writes), each atomically, and a small record of the job,
// shardRecordName, guards the folder against tasks of a different job. A multi-page
// output (.tif, .raw, .nii, .nii.gz) gets one part file per task beside it,
// OUT.part-IIII-of-NNNN.tif, a multi-page TIFF whose page 0 carries the job's record
// (tiffstack.CreateNoted); 'tripass join' checks the parts and assembles OUT.

var (
	flagShard = &cli.StringFlag{
		Name:     "shard",
		Category: "Cluster",
		Usage: "compute only task `I/N` of an even split of the output slices along z; I counts " +
			"from 1 (1/8 … 8/8). 'auto' reads the task from a Slurm job array (SLURM_ARRAY_TASK_ID " +
			"with its MIN/MAX or COUNT, any start and step) or a Kubernetes Indexed Job " +
			"(JOB_COMPLETION_INDEX, counting from 0, with --shard-count). A folder OUT gets the " +
			"task's slice files; a file OUT gets a part file OUT.part-I-of-N.tif for 'tripass join'",
	}
	flagShardCount = &cli.IntFlag{
		Name:     "shard-count",
		Category: "Cluster",
		Usage:    "number of tasks `N` for --shard auto under Kubernetes (the Job's completions); with Slurm, a check",
	}
)

// shardFlags are appended to the flags of every streaming command.
func shardFlags() []cli.Flag { return []cli.Flag{flagShard, flagShardCount} }

// shardRecordName is the record of the job that fills a slice folder in shards.
const shardRecordName = ".tripass-shards.json"

// Formats of the records, versioned so that a later tripass can refuse what it cannot read.
const (
	partFormat   = "tripass-part/1"
	folderFormat = "tripass-shards/1"
)

// shardSpec is one task of a sharded job.
type shardSpec struct {
	task, count int // task counts from 1
	z0, z1, nz  int
	from        string // where the task came from, for messages ("--shard 3/8", "Slurm array task 7")
	job         string // the job's fingerprint
	rec         shardRecord
}

// shardRecord describes the job a part file or a sharded folder belongs to: enough to
// check that parts fit together and to write the joined output exactly as a whole run
// would have.
type shardRecord struct {
	Format  string `json:"format"`
	Job     string `json:"job"` // fingerprint: input identity, command, parameters, N
	Command string `json:"command"`
	Version string `json:"version"`
	Task    int    `json:"task,omitempty"` // counting from 1; parts only
	Count   int    `json:"count"`
	Z0      int    `json:"z0"` // parts only: output slices [z0, z1)
	Z1      int    `json:"z1"`
	Output  struct {
		NX      int        `json:"nx"`
		NY      int        `json:"ny"`
		NZ      int        `json:"nz"`
		Type    string     `json:"type"`
		Spacing [3]float64 `json:"spacing"`
		Unit    string     `json:"unit,omitempty"`
	} `json:"output"`
	// How the whole run would write OUT: the output flags as given.
	Target struct {
		Name      string `json:"name"` // OUT as the tasks were given it
		Compress  string `json:"compress"`
		BigTIFF   bool   `json:"bigtiff"`
		RawEndian string `json:"raw_endian"`
	} `json:"target"`
	Orientation *nifti.Orientation `json:"nifti_orientation,omitempty"`
}

func (r *shardRecord) header() (volume.Header, error) {
	t, err := volume.ParseSampleType(r.Output.Type)
	if err != nil {
		return volume.Header{}, err
	}
	h := volume.Header{NX: r.Output.NX, NY: r.Output.NY, NZ: r.Output.NZ, Type: t,
		Spacing: r.Output.Spacing, Unit: r.Output.Unit}
	return h, h.Validate()
}

// evenSplit returns the output slices [z0, z1) of task (counting from 1) of count over
// nz slices: z0 = (task−1)·nz/count, z1 = task·nz/count. With more tasks than slices
// some ranges are empty.
func evenSplit(task, count, nz int) (z0, z1 int) {
	return int(int64(task-1) * int64(nz) / int64(count)), int(int64(task) * int64(nz) / int64(count))
}

// parseShard reads --shard and --shard-count: the task (counting from 1), the number of
// tasks, and where they came from.
func parseShard(c *cli.Context, getenv func(string) string) (task, count int, from string, err error) {
	s := strings.TrimSpace(c.String(flagShard.Name))
	want := c.Int(flagShardCount.Name)
	if want < 0 || (c.IsSet(flagShardCount.Name) && want == 0) {
		return 0, 0, "", usageErrorf("--shard-count %d: want the number of tasks, 1 or more", want)
	}
	if s == "auto" {
		return shardFromEnv(getenv, want)
	}
	is, ns, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(strings.TrimSpace(is))
	n, err2 := strconv.Atoi(strings.TrimSpace(ns))
	switch {
	case !ok || err1 != nil || err2 != nil:
		return 0, 0, "", usageErrorf("--shard %q: want I/N (task I of N, I from 1) or auto", s)
	case n < 1:
		return 0, 0, "", usageErrorf("--shard %q: the number of tasks must be 1 or more", s)
	case i == 0:
		return 0, 0, "", usageErrorf("--shard %q: I counts from 1 (1/%d … %d/%d); for an index from 0 use --shard auto or add 1", s, n, n, n)
	case i < 1 || i > n:
		return 0, 0, "", usageErrorf("--shard %q: task %d is not among 1 … %d", s, i, n)
	case want > 0 && want != n:
		return 0, 0, "", usageErrorf("--shard %q disagrees with --shard-count %d", s, want)
	}
	return i, n, "--shard " + s, nil
}

// shardFromEnv finds the task in the scheduler's environment: a Slurm job array
// (SLURM_ARRAY_TASK_ID and _MIN, with _COUNT or _MAX, and _STEP if not 1) or a
// Kubernetes Indexed Job (JOB_COMPLETION_INDEX, from 0, with --shard-count).
func shardFromEnv(getenv func(string) string, want int) (task, count int, from string, err error) {
	num := func(name string) (int, bool, error) {
		v := strings.TrimSpace(getenv(name))
		if v == "" {
			return 0, false, nil
		}
		n, err := strconv.Atoi(v)
		if err != nil || n < 0 {
			return 0, true, usageErrorf("--shard auto: %s=%q is not a whole number", name, v)
		}
		return n, true, nil
	}
	id, isSlurm, err := num("SLURM_ARRAY_TASK_ID")
	if err != nil {
		return 0, 0, "", err
	}
	if isSlurm {
		lo, okMin, err := num("SLURM_ARRAY_TASK_MIN")
		if err != nil {
			return 0, 0, "", err
		}
		hi, okMax, err := num("SLURM_ARRAY_TASK_MAX")
		if err != nil {
			return 0, 0, "", err
		}
		n, okCount, err := num("SLURM_ARRAY_TASK_COUNT")
		if err != nil {
			return 0, 0, "", err
		}
		step, okStep, err := num("SLURM_ARRAY_TASK_STEP")
		if err != nil {
			return 0, 0, "", err
		}
		if !okStep || step == 0 {
			step = 1
		}
		if !okMin || (!okMax && !okCount) {
			return 0, 0, "", usageErrorf("--shard auto: SLURM_ARRAY_TASK_ID is set but not SLURM_ARRAY_TASK_MIN with _MAX or _COUNT; give --shard I/N")
		}
		if okMax {
			span := (hi-lo)/step + 1
			if hi < lo || (hi-lo)%step != 0 || (okCount && n != span) {
				return 0, 0, "", usageErrorf("--shard auto: the Slurm array (min %d, max %d, step %d, %d tasks) is not one evenly stepped range; give --shard I/N", lo, hi, step, n)
			}
			n = span
		}
		if id < lo || (id-lo)%step != 0 || (id-lo)/step >= n {
			return 0, 0, "", usageErrorf("--shard auto: SLURM_ARRAY_TASK_ID %d is not in the array (min %d, step %d, %d tasks)", id, lo, step, n)
		}
		if want > 0 && want != n {
			return 0, 0, "", usageErrorf("--shard-count %d disagrees with the Slurm array's %d tasks", want, n)
		}
		return (id-lo)/step + 1, n, fmt.Sprintf("Slurm array task %d", id), nil
	}
	idx, isK8s, err := num("JOB_COMPLETION_INDEX")
	if err != nil {
		return 0, 0, "", err
	}
	if isK8s {
		if want == 0 {
			return 0, 0, "", usageErrorf("--shard auto: JOB_COMPLETION_INDEX is set; add --shard-count N, the Job's completions")
		}
		if idx >= want {
			return 0, 0, "", usageErrorf("--shard auto: JOB_COMPLETION_INDEX %d is not below --shard-count %d", idx, want)
		}
		return idx + 1, want, fmt.Sprintf("Kubernetes completion index %d", idx), nil
	}
	return 0, 0, "", usageErrorf("--shard auto: no scheduler task found (neither SLURM_ARRAY_TASK_ID nor JOB_COMPLETION_INDEX is set); run inside a job array or give --shard I/N")
}

// setShard applies --shard to the job: it picks the task's output range and prepares
// the record of the job. skip is true for a task whose range is empty (more tasks than
// slices): it succeeds and writes nothing, and join expects no part from it.
func (j *streamJob) setShard(c *cli.Context) (skip bool, err error) {
	if !c.IsSet(flagShard.Name) {
		if c.IsSet(flagShardCount.Name) {
			return false, usageErrorf("--shard-count goes with --shard auto")
		}
		return false, nil
	}
	task, count, from, err := parseShard(c, os.Getenv)
	if err != nil {
		return false, err
	}
	nz := j.in.Header().NZ
	s := &shardSpec{task: task, count: count, nz: nz, from: from}
	s.z0, s.z1 = evenSplit(task, count, nz)
	if samePath(j.inPath, j.outPath) {
		return false, usageErrorf("%s: the output is also an input; choose another output name (inputs are never modified)", j.outPath)
	}
	k, err := kindOf(j.outPath)
	if err != nil {
		return false, err
	}
	if k != kindFolder {
		if _, err := os.Lstat(j.outPath); err == nil && !c.Bool(flagOverwrite.Name) {
			return false, usageErrorf("%s: %v", j.outPath, atomicfile.ErrExists)
		}
	}
	if s.z0 == s.z1 {
		note(c, "%s: task %d of %d has no slices (%d tasks for %d slices); nothing to write", j.name, task, count, count, nz)
		return true, nil
	}
	if s.job, err = jobFingerprint(c, j, count); err != nil {
		return false, err
	}
	s.rec = j.record(c, s)
	j.shard = s
	j.z0, j.z1 = s.z0, s.z1
	return false, nil
}

// record fills the job's record for this task.
func (j *streamJob) record(c *cli.Context, s *shardSpec) shardRecord {
	var r shardRecord
	r.Format, r.Job, r.Command, r.Version = partFormat, s.job, j.name, version
	r.Task, r.Count, r.Z0, r.Z1 = s.task, s.count, s.z0, s.z1
	o := j.outH
	r.Output.NX, r.Output.NY, r.Output.NZ, r.Output.Type = o.NX, o.NY, o.NZ, o.Type.String()
	r.Output.Spacing, r.Output.Unit = o.Spacing, o.Unit
	r.Target.Name = j.outPath
	r.Target.Compress = c.String(flagCompress.Name)
	r.Target.BigTIFF = c.Bool(flagBigTIFF.Name)
	r.Target.RawEndian = c.String(flagRawEndian.Name)
	r.Orientation = outputOptionsFrom(j.in).Orientation
	return r
}

// partName is the part file of task (from 1) of count for the output out.
func partName(out string, task, count int) string {
	d := max(4, len(strconv.Itoa(count)))
	return fmt.Sprintf("%s.part-%0*d-of-%0*d.tif", out, d, task, d, count)
}

// create opens the sink of the task: its slice files in a folder OUT, or its part file
// beside a file OUT.
func (s *shardSpec) create(c *cli.Context, j *streamJob) (volume.Sink, error) {
	k, err := kindOf(j.outPath)
	if err != nil {
		return nil, err
	}
	wo, err := tiffOptions(c, j.outH)
	if err != nil {
		return nil, err
	}
	if k == kindFolder {
		return s.createFolder(c, j, wo)
	}
	path := partName(j.outPath, s.task, s.count)
	if k != kindTIFF {
		wo = tiffstack.WriteOptions{} // the part of a raw or NIfTI output is a plain TIFF
	}
	// A part of the same job is a failed or repeated run of this task: replace it.
	// Anything else under the part's name is kept unless --overwrite.
	wo.Overwrite = c.Bool(flagOverwrite.Name)
	if r, err := tiffstack.Open(path); err == nil {
		var old shardRecord
		if json.Unmarshal(r.Note(), &old) == nil && old.Job == s.job {
			wo.Overwrite = true
		}
		r.Close()
	}
	h := j.outH
	h.NZ = s.z1 - s.z0
	note(c, "%s: task %d of %d (%s): output slices %d–%d of %d → %s", j.name, s.task, s.count, s.from, s.z0, s.z1-1, s.nz, path)
	rec, err := json.Marshal(s.rec)
	if err != nil {
		return nil, err
	}
	w, err := tiffstack.CreateNoted(path, h, wo, rec)
	if err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return nil, usageErrorf("%s holds a part of another job: %v", path, err)
		}
		return nil, ioError(fmt.Errorf("%s: %w", path, unwrapPathError(err)))
	}
	return &output{Sink: w, path: path}, nil
}

// createFolder prepares a folder OUT shared by the tasks of one job and returns the
// writer of this task's slice files. The folder's record names the job: a task refuses
// a folder that holds another job's slices (or slices of no recorded job) unless
// --overwrite, and replaces its own files when the same job runs it again.
func (s *shardSpec) createFolder(c *cli.Context, j *streamJob, wo tiffstack.WriteOptions) (volume.Sink, error) {
	dir := strings.TrimRight(j.outPath, "/")
	if dir == "" {
		dir = "/"
	}
	if err := os.MkdirAll(dir, 0o777); err != nil {
		return nil, ioError(fmt.Errorf("%s: %w", dir, unwrapPathError(err)))
	}
	rec := s.rec
	rec.Format, rec.Task, rec.Z0, rec.Z1 = folderFormat, 0, 0, 0
	// List the slices before reading the record: a task of the same job writes the
	// record before its first slice, so slices seen here imply a record below.
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, ioError(fmt.Errorf("%s: %w", dir, unwrapPathError(err)))
	}
	hasSlices := false
	for _, e := range ents {
		if n := strings.ToLower(e.Name()); !strings.HasPrefix(n, ".") && (strings.HasSuffix(n, ".tif") || strings.HasSuffix(n, ".tiff")) {
			hasSlices = true
			break
		}
	}
	recPath := filepath.Join(dir, shardRecordName)
	old, err := readFolderRecord(recPath)
	overwrite := c.Bool(flagOverwrite.Name)
	switch {
	case err == nil && old.Job == rec.Job:
		// The same job: another task, or this task again.
	case err == nil && !overwrite:
		return nil, usageErrorf("%s holds slices of another job (%s %d tasks, job %.12s); use --overwrite or another folder", dir, old.Command, old.Count, old.Job)
	case err != nil && !errors.Is(err, os.ErrNotExist) && !overwrite:
		return nil, inputError(fmt.Errorf("%s: %w", recPath, err))
	case errors.Is(err, os.ErrNotExist) && hasSlices && !overwrite:
		return nil, usageErrorf("%s already holds TIFF files that no sharded tripass job recorded; use --overwrite or another folder", dir)
	}
	if err != nil || old.Job != rec.Job {
		if err := writeFolderRecord(recPath, rec); err != nil {
			return nil, ioError(fmt.Errorf("%s: %w", recPath, err))
		}
	}
	note(c, "%s: task %d of %d (%s): output slices %d–%d of %d → %s", j.name, s.task, s.count, s.from, s.z0, s.z1-1, s.nz, dir)
	w, err := tiffstack.CreateFolderRange(dir, j.outH, wo, s.z0, s.z1)
	if err != nil {
		return nil, ioError(fmt.Errorf("%s: %w", dir, unwrapPathError(err)))
	}
	return &output{Sink: w, path: dir}, nil
}

func readFolderRecord(path string) (shardRecord, error) {
	var r shardRecord
	b, err := os.ReadFile(path)
	if err != nil {
		return r, err
	}
	if err := json.Unmarshal(b, &r); err != nil || r.Format != folderFormat {
		return r, fmt.Errorf("not a record of a sharded tripass job (%s)", folderFormat)
	}
	return r, nil
}

// writeFolderRecord writes the record atomically; tasks of one job write the same
// bytes, so it does not matter which rename lands last.
func writeFolderRecord(path string, r shardRecord) error {
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	f, err := atomicfile.Create(path, true)
	if err != nil {
		return err
	}
	if _, err := f.Write(append(b, '\n')); err != nil {
		f.Abort()
		return err
	}
	return f.Commit()
}

// runtimeFlags change how a task runs, not what it computes; the fingerprint leaves
// them out.
var runtimeFlags = map[string]bool{
	"shard": true, "shard-count": true, "threads": true, "quiet": true, "log": true, "overwrite": true,
}

// jobFingerprint identifies the job every task of it runs: the input (path, size and
// modification time of its files, header), the command and the parameters that change
// the result, the plans down to their taps, the output header and the number of tasks.
// Tasks of one job compute it alike on any node that sees the same files at the same
// paths.
func jobFingerprint(c *cli.Context, j *streamJob, count int) (string, error) {
	h := sha256.New()
	fmt.Fprintf(h, "tripass job\nversion %s\ncommand %s\ntasks %d\n", version, j.name, count)
	if err := hashInput(h, j.in); err != nil {
		return "", err
	}
	if abs, err := filepath.Abs(j.outPath); err == nil {
		fmt.Fprintf(h, "output %s\n", abs)
	}
	fmt.Fprintf(h, "output header %+v\n", j.outH)
	// Every parameter's value, given or default, so that tasks that spell the same
	// job differently ("--edge symmetric" or nothing) agree.
	var names []string
	for _, f := range c.Command.Flags {
		if name := f.Names()[0]; !runtimeFlags[name] && name != "help" {
			names = append(names, name)
		}
	}
	sort.Strings(names)
	for _, n := range names {
		fmt.Fprintf(h, "flag %s=%v\n", n, c.Value(n))
	}
	fmt.Fprintf(h, "combine %v edge %v fill %x\n", j.combine, j.opt.Edge, math.Float64bits(j.opt.Fill))
	for i, p := range j.plans {
		k := p.Kernel
		fmt.Fprintf(h, "plan %d form %v order %v ranks %v kernel %d×%d×%d\n", i, p.Form, p.Order, p.Ranks, k.I, k.J, k.K)
		hashFloats(h, k.Data)
		for _, b := range p.Branches {
			hashFloats(h, b.First)
			for _, l := range b.Leaves {
				hashFloats(h, l.Second)
				hashFloats(h, l.Z)
			}
		}
	}
	return hex.EncodeToString(h.Sum(nil)[:16]), nil
}

func hashFloats(h hash.Hash, v []float64) {
	var b [8]byte
	binary.LittleEndian.PutUint64(b[:], uint64(len(v)))
	h.Write(b[:])
	for _, x := range v {
		binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
		h.Write(b[:])
	}
}

// hashInput adds the identity of the input: its absolute path, the size and
// modification time of its file (of every file, for a slice folder), and its header.
func hashInput(w io.Writer, in *input) error {
	abs, err := filepath.Abs(in.path)
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "input %s (%s)\nheader %+v\n", abs, in.kind, in.Header())
	files := []string{in.path}
	if fr, ok := in.Source.(*tiffstack.FolderReader); ok {
		files = fr.Files()
	}
	for _, f := range files {
		st, err := os.Stat(f)
		if err != nil {
			return ioError(fmt.Errorf("%s: %w", f, unwrapPathError(err)))
		}
		fmt.Fprintf(w, "file %s %d %d\n", filepath.Base(f), st.Size(), st.ModTime().UnixNano())
	}
	return nil
}
