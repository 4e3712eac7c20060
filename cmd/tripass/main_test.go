package main

import (
	"bytes"
	"strings"
	"testing"
)

// runCLI runs tripass with args and returns its exit code, stdout and stderr.
func runCLI(t *testing.T, args ...string) (int, string, string) {
	t.Helper()
	var out, errb bytes.Buffer
	code := run(append([]string{"tripass"}, args...), &out, &errb)
	return code, out.String(), errb.String()
}

func TestHelpMentionsCaution(t *testing.T) {
	code, out, _ := runCLI(t, "--help")
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	if !strings.Contains(out, "not a medical device") {
		t.Errorf("--help lacks the research-tool caution:\n%s", out)
	}
}

func TestUnknownCommandIsUsageError(t *testing.T) {
	code, _, _ := runCLI(t, "no-such-command")
	if code == 0 {
		t.Fatalf("unknown command exited 0")
	}
}
