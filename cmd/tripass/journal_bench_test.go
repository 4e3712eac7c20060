package main

import (
	"fmt"
	"path/filepath"
	"testing"
	"time"
)

// BenchmarkCheckpoints measures what the run journal costs: smooth (σ = 2, one thread)
// of a 256×256×128 float32 stack (32 MiB) into raw and TIFF outputs, with checkpoints
// (fsync of the output, then an atomic journal replacement) every 4 MiB, every 16 MiB
// (the default) and never (only the final fsync of the commit).
func BenchmarkCheckpoints(b *testing.B) {
	dir := b.TempDir()
	t := &testing.T{}
	raw := writeRawFloat32(t, filepath.Join(dir, "in.raw"), 256, 256, 128)
	defer func(n int64, d time.Duration) { checkpointBytes, checkpointInterval = n, d }(checkpointBytes, checkpointInterval)
	for _, out := range []string{"out.raw", "out.tif"} {
		for _, every := range []int64{4 << 20, 16 << 20, 1 << 62} {
			name := fmt.Sprintf("%s/every=%dMiB", out, every>>20)
			if every == 1<<62 {
				name = out + "/never"
			}
			b.Run(name, func(b *testing.B) {
				checkpointBytes, checkpointInterval = every, time.Hour
				b.SetBytes(256 * 256 * 128 * 4)
				for i := 0; i < b.N; i++ {
					args := append([]string{"smooth", filepath.Join(dir, "in.raw"), filepath.Join(dir, out),
						"--sigma", "2", "--threads", "1", "-q", "--overwrite"}, raw...)
					if code, _, errs := runCLI(&testing.T{}, args...); code != 0 {
						b.Fatalf("exit %d: %s", code, errs)
					}
				}
			})
		}
	}
}
