package main

import (
	"errors"
	"fmt"
	"strings"

	"github.com/urfave/cli/v2"
)

// Exit codes, documented in the README.
const (
	ExitOK          = 0
	ExitFailure     = 1 // anything not classified below
	ExitUsage       = 2 // bad command line: unknown flag, missing argument, bad value
	ExitInput       = 3 // bad input data: malformed, truncated or unsupported file
	ExitIO          = 4 // an I/O failure: disk full, permission denied, file-size limit
	ExitInterrupted = 5 // interrupted by a signal; the run can be resumed with --resume
)

// exitError carries an exit code with an error, so that library errors keep their
// text and their %w chain while the command says how the process should end.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// usageErrorf reports a bad command line.
func usageErrorf(format string, a ...any) error {
	return &exitError{ExitUsage, fmt.Errorf(format, a...)}
}

// inputError marks err as a problem with the input data.
func inputError(err error) error {
	if err == nil {
		return nil
	}
	return &exitError{ExitInput, err}
}

// ioError marks err as an I/O failure.
func ioError(err error) error {
	if err == nil {
		return nil
	}
	return &exitError{ExitIO, err}
}

func exitCode(err error) int {
	var ee *exitError
	if errors.As(err, &ee) {
		return ee.code
	}
	var ce cli.ExitCoder
	if errors.As(err, &ce) {
		return ce.ExitCode()
	}
	if isUsage(err) {
		return ExitUsage
	}
	return ExitFailure
}

// errorLine flattens err into the one line printed after "tripass: ".
func errorLine(err error) string {
	s := strings.TrimSpace(err.Error())
	s = strings.ReplaceAll(s, "\n", "; ")
	return s
}

// isUsage recognises the parse errors urfave/cli returns without calling OnUsageError
// (an unknown command, for one).
func isUsage(err error) bool {
	s := err.Error()
	return strings.HasPrefix(s, "flag provided but not defined") ||
		strings.HasPrefix(s, "Required flag") ||
		strings.HasPrefix(s, "invalid value") ||
		strings.Contains(s, "No help topic for")
}

func usageError(c *cli.Context, err error, isSubcommand bool) error {
	msg := err.Error()
	if name, ok := strings.CutPrefix(msg, "flag provided but not defined: -"); ok {
		name = strings.TrimLeft(name, "-")
		msg = "unknown flag --" + name
		if s := nearestFlag(c, name); s != "" {
			msg += "; did you mean --" + s + "?"
		}
	}
	if c != nil && c.Command != nil && c.Command.Name != "" {
		msg += fmt.Sprintf(" (see 'tripass %s --help')", c.Command.FullName())
	}
	return &exitError{ExitUsage, errors.New(msg)}
}

// nearestFlag returns the flag of the current command closest to name by edit distance,
// if it is close enough to be a likely typo.
func nearestFlag(c *cli.Context, name string) string {
	if c == nil || c.Command == nil {
		return ""
	}
	best, bestD := "", len(name)/2+2
	for _, f := range c.Command.Flags {
		for _, n := range f.Names() {
			if d := editDistance(name, n); d < bestD {
				best, bestD = n, d
			}
		}
	}
	return best
}

// editDistance is the Levenshtein distance between a and b.
func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}
