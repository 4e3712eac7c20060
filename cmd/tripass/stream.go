package main

import (
	"errors"
	"fmt"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/tensor"
	"github.com/tripass/tripass/volume"
)

// A streamJob is one run of a streaming command (convert, smooth, gradient, laplace,
// dog, convolve) from IN to OUT. Every such command builds one and calls run, so that
// what applies to all of them — output ranges, atomic outputs, progress, the summary —
// lives in one place.
type streamJob struct {
	name            string
	inPath, outPath string
	in              *input
	outH            volume.Header  // the output's header (size and spacing of the input)
	plans           []*tensor.Plan // nil: a plain copy converting the sample type
	combine         volume.Combine
	opt             volume.FilterOptions
	what            string // what is applied, one line for stderr and the summary
	// z0, z1 is the range of output slices this run computes; run sets the whole stack
	// when both are zero.
	z0, z1 int
	// shard, if not nil, makes this run one task of a job split across a scheduler
	// (shard.go): its sink is the task's part file or its slice files.
	shard *shardSpec
}

// run streams the job's input through its plans (or copies it) into a new output.
//
// The output is written under a fixed temporary name beside its target, with a run
// journal (journal.go) that records from time to time how many slices are durable. On
// SIGINT or SIGTERM the run stops between two slices, keeps the partial output and
// ends with ExitInterrupted; --resume continues it, as it continues a run that was
// killed, from the last slice its journal records.
func (j *streamJob) run(c *cli.Context) (volume.FilterStats, error) {
	h := j.in.Header()
	if j.z0 == 0 && j.z1 == 0 {
		j.z1 = h.NZ
	}
	ctx, stop := interruptContext()
	defer stop()
	var sink volume.Sink
	var err error
	var rs *runJournal
	if j.shard != nil {
		sink, err = j.shard.create(c, j)
	} else if rs, err = j.openJournal(c); err == nil {
		defer rs.release()
		opt := outputOptionsFrom(j.in)
		opt.ResumeAt, opt.ResumeSize = rs.jr.Done, rs.jr.Bytes
		sink, err = createOutput(c, j.outPath, j.outH, opt, j.inPath)
		if err != nil && rs.jr.Done > 0 {
			err = fmt.Errorf("cannot resume: %w", err)
		}
	}
	if err != nil {
		return volume.FilterStats{}, err
	}
	w := &checkpointWriter{ctx: ctx, dst: sink}
	done := 0 // output slices an earlier run made durable
	if rs != nil {
		done = rs.jr.Done
		if o, ok := sink.(*output); ok && resumablePath(j.outPath) {
			w.sink, _ = o.Sink.(resumableSink)
		}
		if w.sink != nil {
			w.jr, w.jpath = rs.jr, rs.path
			if err := w.record(done, rs.jr.Bytes); err != nil {
				sink.Abort()
				return volume.FilterStats{}, err
			}
		}
		if done > 0 {
			note(c, "%s: resuming after %d of %d slices", j.outPath, done, j.z1-j.z0)
		}
	}
	if j.what != "" {
		note(c, "%s: %s", j.name, j.what)
	}
	src := &cancelSource{input: j.in, ctx: ctx, count: j.plans == nil}
	p := newProgress(c, j.name, h)
	p.plan = j.what // for the --log json summary
	p.resize(j.z1 - j.z0)
	var st volume.FilterStats
	switch {
	case j.z0+done >= j.z1:
		// Every slice was durable; only the commit was missing.
	case j.plans == nil:
		st.Clamped, err = volume.CopyRange(w, src, j.outH.Type, j.z0+done, j.z1, func(n int) { p.update(done + n) })
		st.NaN, st.Inf = src.nan, src.inf
	default:
		opt := j.opt
		opt.Progress = func(n, total int) { p.update(done + n) }
		st, err = volume.FilterRange(w, src, j.outH.Type, j.plans, j.combine, opt, j.z0+done, j.z1)
	}
	st.Slices = w.written
	p.done()
	if err != nil {
		if errors.Is(err, errInterrupted) && w.sink != nil {
			n, serr := w.suspend()
			if serr == nil {
				return st, &exitError{ExitInterrupted, fmt.Errorf(
					"interrupted: %d of %d slices of %s are kept in %s; run the same command with --resume to continue",
					n, j.z1-j.z0, j.outPath, partPath(j.outPath))}
			}
			err = fmt.Errorf("interrupted, and the partial output could not be kept: %w", serr)
		}
		sink.Abort()
		rs.discard()
		if errors.Is(err, errInterrupted) {
			return st, &exitError{ExitInterrupted, fmt.Errorf("%s: interrupted; this output cannot be continued, so the partial output was removed (run the command again to start over)", j.outPath)}
		}
		if werr := writeFailure(j.outPath, j.z0+done+w.written, err); werr != nil {
			return st, werr
		}
		return st, streamError(j.inPath, j.outPath, err)
	}
	if err := sink.Close(); err != nil {
		sink.Abort()
		rs.discard()
		if werr := writeFailure(j.outPath, j.z1-1, err); werr != nil {
			return st, werr
		}
		return st, err
	}
	rs.discard()
	o, written := j.outH, j.outPath
	if out, ok := sink.(*output); ok {
		written = out.path // a shard's part file, or OUT itself
	}
	note(c, "wrote %s: %d×%d×%d %s", written, o.NX, o.NY, j.z1-j.z0, o.Type)
	if st.NaN > 0 || st.Inf > 0 {
		if j.plans == nil {
			note(c, "the input holds %d NaN and %d infinite voxels", st.NaN, st.Inf)
		} else {
			note(c, "the input holds %d NaN and %d infinite voxels; they spread into their neighbourhoods", st.NaN, st.Inf)
		}
	}
	if st.Clamped > 0 {
		note(c, "%d output voxels were outside the %s range and were clamped (use --type float32 to keep them)", st.Clamped, o.Type)
	}
	return st, nil
}
