package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"github.com/urfave/cli/v2"
)

// leafCommands returns every command a user runs (those without subcommands), with
// the words that name it ("kernel inspect").
func leafCommands(cmds []*cli.Command, prefix []string) map[string]*cli.Command {
	out := map[string]*cli.Command{}
	for _, c := range cmds {
		if c.Name == "help" {
			continue
		}
		path := append(append([]string(nil), prefix...), c.Name)
		if len(c.Subcommands) > 0 {
			for k, v := range leafCommands(c.Subcommands, path) {
				out[k] = v
			}
			continue
		}
		out[strings.Join(path, " ")] = c
	}
	return out
}

// TestEveryCommandHelpTeaches checks what a reader needs from each command's help: a
// short description, an example with the command's own name, and a usage line for
// every flag (urfave/cli adds the defaults).
func TestEveryCommandHelpTeaches(t *testing.T) {
	leaves := leafCommands(newApp().Commands, nil)
	if len(leaves) < 10 {
		t.Fatalf("only %d commands found", len(leaves))
	}
	for name, c := range leaves {
		t.Run(name, func(t *testing.T) {
			code, out, errs := runCLI(t, append(strings.Fields(name), "--help")...)
			if code != 0 {
				t.Fatalf("--help exit %d: %s", code, errs)
			}
			if c.Usage == "" || len(c.Usage) > 120 {
				t.Errorf("one-line description %q: want a short one", c.Usage)
			}
			if !strings.Contains(out, "Example") || !strings.Contains(out, "tripass "+name+" ") {
				t.Errorf("help has no example of 'tripass %s ...'", name)
			}
			for _, f := range c.Flags {
				dg, ok := f.(cli.DocGenerationFlag)
				if ok && strings.TrimSpace(dg.GetUsage()) == "" {
					t.Errorf("flag --%s has no usage text", f.Names()[0])
				}
			}
		})
	}
}

func TestVersion(t *testing.T) {
	code, out, _ := runCLI(t, "--version")
	if code != 0 || !strings.Contains(out, version) {
		t.Errorf("--version: exit %d, %q; want the version %s", code, out, version)
	}
}

func TestCompletionScripts(t *testing.T) {
	tests := []struct {
		shell string
		want  string // a line every script of that kind has
	}{
		{"bash", "complete -o default -o bashdefault -F _tripass_words tripass"},
		{"zsh", "#compdef tripass"},
	}
	for _, tt := range tests {
		t.Run(tt.shell, func(t *testing.T) {
			code, out, errs := runCLI(t, "completion", tt.shell)
			if code != 0 || !strings.Contains(out, tt.want) {
				t.Fatalf("exit %d, %q; want a script with %q", code, errs, tt.want)
			}
			sh, err := exec.LookPath(tt.shell)
			if err != nil {
				t.Skipf("no %s here to check the script's syntax", tt.shell)
			}
			script := filepath.Join(t.TempDir(), "complete."+tt.shell)
			if err := os.WriteFile(script, []byte(out), 0o644); err != nil {
				t.Fatal(err)
			}
			if msg, err := exec.Command(sh, "-n", script).CombinedOutput(); err != nil {
				t.Errorf("%s -n: %v\n%s", tt.shell, err, msg)
			}
		})
	}
	if code, _, _ := runCLI(t, "completion", "fish"); code != ExitUsage {
		t.Errorf("completion fish: exit %d, want a usage error", code)
	}
}

// TestCompletionAnswers checks the words tripass offers the scripts. urfave/cli looks
// at the process's own arguments for the word being completed, so the test sets them.
func TestCompletionAnswers(t *testing.T) {
	tests := []struct {
		args []string // as typed, ending in the completion flag
		want string
		not  string
	}{
		{[]string{completionFlag}, "preview\n", ""},
		{[]string{"kernel", completionFlag}, "inspect\n", "preview\n"},
		{[]string{"preview", "--wi", completionFlag}, "--width\n", "--at\n"},
		// A positional argument before the flag must not run the command.
		{[]string{"preview", "in.tif", "--per", completionFlag}, "--percentiles\n", ""},
	}
	for _, tt := range tests {
		t.Run(strings.Join(tt.args, " "), func(t *testing.T) {
			saved := os.Args
			os.Args = append([]string{"tripass"}, tt.args...)
			defer func() { os.Args = saved }()
			code, out, errs := runCLI(t, tt.args...)
			if code != 0 || !strings.Contains(out, tt.want) || (tt.not != "" && strings.Contains(out, tt.not)) {
				t.Errorf("exit %d, offered %q (stderr %q); want %q and not %q", code, out, errs, tt.want, tt.not)
			}
		})
	}
}

// buildTripass builds the command from this package into a temporary folder.
func buildTripass(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "tripass")
	if msg, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Skipf("cannot build tripass here: %v\n%s", err, msg)
	}
	return bin
}

// TestBashCompletionEndToEnd loads the bash script into bash and completes words with
// a tripass built from this package.
func TestBashCompletionEndToEnd(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the command")
	}
	bash, err := exec.LookPath("bash")
	if err != nil {
		t.Skip("no bash")
	}
	bin := buildTripass(t)
	script := `source <("$BIN" completion bash)
try() { COMP_WORDS=("$BIN" "$@"); COMP_CWORD=$#; _tripass_words; echo "${COMPREPLY[*]}"; }
try sm
try preview --wid
try kernel ""
try preview in.tif ""
`
	cmd := exec.Command(bash, "-c", script)
	cmd.Env = append(os.Environ(), "BIN="+bin)
	out, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("bash: %v\n%s", err, out)
	}
	want := []string{"smooth", "--width", "make inspect", ""}
	got := strings.Split(strings.TrimSuffix(string(out), "\n"), "\n")
	if len(got) != len(want) {
		t.Fatalf("bash printed %q, want the lines %q", out, want)
	}
	for i := range want {
		if got[i] != want[i] {
			t.Errorf("completion %d: %q, want %q", i, got[i], want[i])
		}
	}
}
