package main

import (
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
}

// run streams the job's input through its plans (or copies it) into a new output.
func (j *streamJob) run(c *cli.Context) (volume.FilterStats, error) {
	h := j.in.Header()
	if j.z0 == 0 && j.z1 == 0 {
		j.z1 = h.NZ
	}
	sink, err := createOutput(c, j.outPath, j.outH, outputOptionsFrom(j.in), j.inPath)
	if err != nil {
		return volume.FilterStats{}, err
	}
	if j.what != "" {
		note(c, "%s: %s", j.name, j.what)
	}
	p := newProgress(c, j.name, h)
	p.plan = j.what // for the --log json summary
	var st volume.FilterStats
	if j.plans == nil {
		st.Clamped, err = volume.CopyRange(sink, j.in, j.outH.Type, j.z0, j.z1, p.update)
		st.Slices = j.z1 - j.z0
	} else {
		opt := j.opt
		opt.Progress = func(done, total int) { p.update(done) }
		st, err = volume.FilterRange(sink, j.in, j.outH.Type, j.plans, j.combine, opt, j.z0, j.z1)
	}
	p.done()
	if err != nil {
		sink.Abort()
		return st, streamError(j.inPath, j.outPath, err)
	}
	if err := sink.Close(); err != nil {
		sink.Abort()
		return st, err
	}
	o := j.outH
	note(c, "wrote %s: %d×%d×%d %s", j.outPath, o.NX, o.NY, j.z1-j.z0, o.Type)
	if st.NaN > 0 || st.Inf > 0 {
		note(c, "the input holds %d NaN and %d infinite voxels; they spread into their neighbourhoods", st.NaN, st.Inf)
	}
	if st.Clamped > 0 {
		note(c, "%d output voxels were outside the %s range and were clamped (use --type float32 to keep them)", st.Clamped, o.Type)
	}
	return st, nil
}
