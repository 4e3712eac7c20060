//go:build unix

package main

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"syscall"

	"github.com/tripass/tripass/internal/atomicfile"
)

// lockOutput makes sure that no other tripass run writes the same output at the same
// time: partial outputs have fixed names, and two runs would write into one file. It
// holds an advisory lock (flock) on ".tripass-part-<name>.lock" beside the target,
// which the system releases when the process ends, however it ends.
func lockOutput(target string) (release func(), err error) {
	target = filepath.Clean(strings.TrimRight(target, "/"))
	p := filepath.Join(filepath.Dir(target), atomicfile.TempPrefix+filepath.Base(target)+".lock")
	f, err := os.OpenFile(p, os.O_RDWR|os.O_CREATE, 0o666)
	if err != nil {
		return nil, ioError(fmt.Errorf("%s: %w", target, unwrapPathError(err)))
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		f.Close()
		if errors.Is(err, syscall.EWOULDBLOCK) {
			return nil, fmt.Errorf("%s: another tripass run is writing this output", target)
		}
		return nil, ioError(fmt.Errorf("%s: locking %s: %w", target, p, err))
	}
	return func() {
		os.Remove(p)
		f.Close()
	}, nil
}
