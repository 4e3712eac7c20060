package main

import (
	"context"
	"encoding/binary"
	"errors"
	"os"
	"os/signal"
	"syscall"
	"time"

	"github.com/tripass/tripass/volume"
)

// errInterrupted stops the engine or the copy between two slices when SIGINT or
// SIGTERM arrives.
var errInterrupted = errors.New("interrupted")

// interruptContext returns a context that is cancelled by the first SIGINT or SIGTERM.
// Once it is, the signals get their default behaviour back, so that a second Ctrl-C
// ends a run that does not stop quickly enough. stop releases the signals.
func interruptContext() (ctx context.Context, stop func()) {
	ctx, stop = signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	go func() {
		<-ctx.Done()
		stop()
	}()
	return ctx, stop
}

// Checkpoints: how often the output is synced and the journal replaced. A checkpoint
// costs an fsync of what was written since the last one (written anyway) and a small
// journal write, so it is cheap at this spacing; a kill loses at most this much work.
var (
	checkpointInterval = 2 * time.Second
	checkpointBytes    = int64(16 << 20)
)

// resumableSink is a sink that can make its slices durable and keep its partial output
// when a run stops early (the writers of io/rawstack, io/tiffstack and io/nifti).
type resumableSink interface {
	volume.Sink
	// Sync makes every slice written so far durable and returns how many there are and
	// the output's length.
	Sync() (slices int, size int64, err error)
	// Suspend syncs, closes and keeps the partial output.
	Suspend() (slices int, size int64, err error)
}

// checkpointWriter passes slices on to the output, refuses them once the run is
// interrupted, and from time to time syncs the output and records in the journal how
// many slices are durable.
type checkpointWriter struct {
	ctx     context.Context
	dst     volume.SliceWriter // the output, with its error messages
	sink    resumableSink      // the same output, nil if it cannot be resumed
	jr      *journal
	jpath   string
	written int // slices written by this run
	last    time.Time
	pending int64 // bytes written since the last checkpoint
}

func (w *checkpointWriter) WriteSlice(s *volume.Slice) error {
	if w.ctx.Err() != nil {
		return errInterrupted
	}
	if err := w.dst.WriteSlice(s); err != nil {
		return err
	}
	w.written++
	w.pending += int64(len(s.Data))
	if w.sink == nil {
		return nil
	}
	if w.pending >= checkpointBytes || time.Since(w.last) >= checkpointInterval {
		return w.checkpoint()
	}
	return nil
}

// checkpoint syncs the output, then records what is durable in the journal.
func (w *checkpointWriter) checkpoint() error {
	n, size, err := w.sink.Sync()
	if err != nil {
		return err
	}
	return w.record(n, size)
}

func (w *checkpointWriter) record(n int, size int64) error {
	jr := *w.jr
	jr.Done, jr.Bytes = n, size
	if err := jr.write(w.jpath); err != nil {
		return ioError(err)
	}
	w.last, w.pending = time.Now(), 0
	return nil
}

// suspend keeps the partial output after an interruption and records its last durable
// slice. It returns how many slices of the output a resumed run finds done.
func (w *checkpointWriter) suspend() (int, error) {
	n, size, err := w.sink.Suspend()
	if err != nil {
		return 0, err
	}
	return n, w.record(n, size)
}

// cancelSource stops reading once the run is interrupted, and counts NaN and infinite
// samples for the copy path (the engine counts them itself when it filters).
type cancelSource struct {
	*input
	ctx      context.Context
	count    bool
	nan, inf int64
}

func (s *cancelSource) ReadSlice(dst *volume.Slice) error {
	if s.ctx.Err() != nil {
		return errInterrupted
	}
	if err := s.input.ReadSlice(dst); err != nil {
		return err
	}
	if s.count {
		nan, inf := countNonFinite(dst)
		s.nan += nan
		s.inf += inf
	}
	return nil
}

// countNonFinite counts the NaN and infinite samples of a float slice (none in an
// integer one), with one type switch per slice.
func countNonFinite(s *volume.Slice) (nan, inf int64) {
	d := s.Data[:s.Len()*s.Type.Size()]
	switch s.Type {
	case volume.Float32:
		for i := 0; i+4 <= len(d); i += 4 {
			// An exponent of all ones: Inf with a zero mantissa, NaN otherwise.
			b := binary.LittleEndian.Uint32(d[i:]) &^ (1 << 31)
			if b > 0x7f800000 {
				nan++
			} else if b == 0x7f800000 {
				inf++
			}
		}
	case volume.Float64:
		for i := 0; i+8 <= len(d); i += 8 {
			b := binary.LittleEndian.Uint64(d[i:]) &^ (1 << 63)
			if b > 0x7ff0000000000000 {
				nan++
			} else if b == 0x7ff0000000000000 {
				inf++
			}
		}
	}
	return nan, inf
}
