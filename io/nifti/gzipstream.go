package nifti

import (
	"compress/flate"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"io"
	"runtime"
	"sync"
)

// gzipChunk is how many uncompressed bytes each compression job takes. Each chunk is
// compressed on its own, so back-references cannot reach into the previous one;
// with deflate's 32 KiB window that costs well under 1% of the size at 512 KiB.
const gzipChunk = 512 << 10

// gzipStream writes one gzip member (RFC 1952) whose deflate data (RFC 1951) are
// compressed in parallel: the input is cut into chunks, each compressed by a worker
// with its own flate.Writer and ended with a sync flush (an empty stored block, which
// leaves the stream byte-aligned and not final), so the compressed chunks join into a
// single valid deflate stream; the last chunk ends with a final block. The CRC-32 and
// length of the trailer are computed in order by the caller's goroutine. Memory is
// bounded by the chunks in flight, whatever the size of the volume.
//
// Compressing chunks independently and joining them with sync flushes is the method
// of pigz's --independent mode (M. Adler); it keeps the output a plain single-member
// gzip file that any gzip reader reads.
// gzipWorkers is the number of compressing goroutines; 0 means GOMAXPROCS. Tests and
// benchmarks set it.
var gzipWorkers = 0

type gzipStream struct {
	out   io.Writer
	cur   *gzipJob      // the chunk being filled
	free  chan *gzipJob // jobs ready to be filled
	work  chan *gzipJob // jobs to compress, for the workers
	order chan *gzipJob // jobs in stream order, for the writer goroutine
	done  chan struct{} // closed when the writer goroutine ends
	crc   uint32
	size  uint32 // input length mod 2^32, as the trailer stores it

	mu  sync.Mutex
	err error // the first error writing out

	started, closed bool
}

type gzipJob struct {
	data  []byte
	out   []byte // compressed
	final bool
	ready chan struct{} // one token when out is complete
}

// appendWriter appends to a byte slice.
type appendWriter struct{ b *[]byte }

func (w appendWriter) Write(p []byte) (int, error) { *w.b = append(*w.b, p...); return len(p), nil }

// newGzipStream starts a gzip member at level on out, with as many workers as
// GOMAXPROCS. It writes the 10-byte member header at once: no name, modification time
// 0 (the same output for the same input), operating system unknown.
func newGzipStream(out io.Writer, level int) (*gzipStream, error) {
	workers := gzipWorkers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	inFlight := 2*workers + 1
	s := &gzipStream{
		out:   out,
		free:  make(chan *gzipJob, inFlight),
		work:  make(chan *gzipJob, inFlight),
		order: make(chan *gzipJob, inFlight),
		done:  make(chan struct{}),
	}
	xfl := byte(0)
	switch level {
	case flate.BestSpeed:
		xfl = 4
	case flate.BestCompression:
		xfl = 2
	}
	// ID1 ID2 CM=8 (deflate) FLG=0 MTIME=0 XFL OS=255 (unknown), RFC 1952 section 2.3.
	if _, err := out.Write([]byte{0x1f, 0x8b, 8, 0, 0, 0, 0, 0, xfl, 255}); err != nil {
		return nil, err
	}
	for i := 0; i < inFlight; i++ {
		s.free <- &gzipJob{ready: make(chan struct{}, 1)}
	}
	for i := 0; i < workers; i++ {
		fw, err := flate.NewWriter(nil, level)
		if err != nil {
			return nil, err
		}
		go compressJobs(fw, s.work)
	}
	go s.writeJobs()
	s.started = true
	s.cur = <-s.free
	s.cur.data = s.cur.data[:0]
	return s, nil
}

// compressJobs is a worker: it compresses each job into its out buffer.
func compressJobs(fw *flate.Writer, work <-chan *gzipJob) {
	for j := range work {
		if j.out == nil {
			// Room for incompressible data: deflate's stored blocks add 5 bytes per
			// 64 KiB (RFC 1951 section 3.2.4), plus the flush.
			j.out = make([]byte, 0, len(j.data)+len(j.data)/64+1024)
		}
		j.out = j.out[:0]
		fw.Reset(appendWriter{&j.out})
		fw.Write(j.data) // writes into memory: cannot fail
		if j.final {
			fw.Close()
		} else {
			fw.Flush()
		}
		j.ready <- struct{}{}
	}
}

// writeJobs writes the compressed jobs out in order and hands their buffers back.
func (s *gzipStream) writeJobs() {
	defer close(s.done)
	for j := range s.order {
		<-j.ready
		if s.failed() == nil {
			if _, err := s.out.Write(j.out); err != nil {
				s.mu.Lock()
				s.err = err
				s.mu.Unlock()
			}
		}
		s.free <- j
	}
}

func (s *gzipStream) failed() error {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.err
}

// Write adds p to the stream. It returns the first error of writing out, which may
// belong to an earlier Write.
func (s *gzipStream) Write(p []byte) (int, error) {
	if s.closed {
		return 0, errors.New("gzip stream: write after close")
	}
	if err := s.failed(); err != nil {
		return 0, err
	}
	n := len(p)
	s.crc = crc32.Update(s.crc, crc32.IEEETable, p)
	s.size += uint32(n) // mod 2^32, as RFC 1952 ISIZE
	for len(p) > 0 {
		if cap(s.cur.data) < gzipChunk {
			s.cur.data = make([]byte, 0, gzipChunk)
		}
		k := min(len(p), gzipChunk-len(s.cur.data))
		s.cur.data = append(s.cur.data, p[:k]...)
		p = p[k:]
		if len(s.cur.data) == gzipChunk {
			s.submit(false)
		}
	}
	return n, nil
}

// submit sends the current chunk to be compressed and takes a free one, waiting when
// every buffer is in flight (which bounds memory).
func (s *gzipStream) submit(final bool) {
	s.cur.final = final
	s.order <- s.cur
	s.work <- s.cur
	if final {
		s.cur = nil
		return
	}
	s.cur = <-s.free
	s.cur.data = s.cur.data[:0]
}

// Close compresses what is left, ends the deflate stream and writes the trailer
// (CRC-32 and length).
func (s *gzipStream) Close() error {
	if s.closed {
		return errors.New("gzip stream: close after close")
	}
	s.submit(true)
	s.stop()
	if err := s.failed(); err != nil {
		return err
	}
	var t [8]byte
	binary.LittleEndian.PutUint32(t[0:], s.crc)
	binary.LittleEndian.PutUint32(t[4:], s.size)
	_, err := s.out.Write(t[:])
	return err
}

// stop ends the workers and the writer goroutine after the jobs in flight.
func (s *gzipStream) stop() {
	if s.closed || !s.started {
		return
	}
	s.closed = true
	close(s.order)
	close(s.work)
	<-s.done
}

// Abort stops the goroutines without finishing the stream.
func (s *gzipStream) Abort() { s.stop() }
