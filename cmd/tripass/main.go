// Command tripass filters 3D imaging volumes (micro-CT, confocal and light-sheet stacks,
// MRI) in bounded memory, and tells whether a 3D kernel splits into cheap 1D passes.
//
// tripass is a research tool, not a medical device: its results are not for diagnosis.
package main

import (
	"fmt"
	"io"
	"os"
	"sort"

	"github.com/urfave/cli/v2"
)

// version is set at build time with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

// commands collects every top-level command; each command file adds its own in init.
var commands []*cli.Command

func register(c *cli.Command) { commands = append(commands, c) }

const caution = "tripass is a research tool, not a medical device. Its results are not for " +
	"diagnosis or treatment; follow local regulations and have results reviewed by qualified people."

func newApp() *cli.App {
	cmds := append([]*cli.Command(nil), commands...)
	sort.Slice(cmds, func(i, j int) bool { return cmds[i].Name < cmds[j].Name })
	app := &cli.App{
		Name:    "tripass",
		Usage:   "filter 3D imaging volumes in bounded memory, with separable kernel planning",
		Version: version,
		Description: "tripass reads image stacks (multi-page TIFF, BigTIFF, folders of TIFF slices, raw), " +
			"smooths them, takes gradients and Laplacians, applies any 3D kernel in its cheapest " +
			"separable form, and writes the result slice by slice, so memory does not grow with the " +
			"number of slices.\n\n" + caution,
		Commands:             cmds,
		EnableBashCompletion: true,
		OnUsageError:         usageError,
		ExitErrHandler:       func(*cli.Context, error) {}, // main reports errors itself
	}
	for _, c := range cmds {
		setUsageHandlers(c)
	}
	return app
}

func setUsageHandlers(c *cli.Command) {
	if c.OnUsageError == nil {
		c.OnUsageError = usageError
	}
	// urfave/cli would give every command a "help" subcommand on its first run, which
	// makes a leaf command look like a parent the next time (the demo and the tests run
	// several commands in one process); --help serves leaf commands.
	if len(c.Subcommands) == 0 {
		c.HideHelpCommand = true
	}
	for _, s := range c.Subcommands {
		setUsageHandlers(s)
	}
}

func main() {
	os.Exit(run(os.Args, os.Stdout, os.Stderr))
}

// run executes tripass with args (args[0] is the program name) and returns the exit code.
func run(args []string, stdout, stderr io.Writer) int {
	app := newApp()
	app.Writer, app.ErrWriter = stdout, stderr
	if !completing(args) { // completion scripts need the words as typed (completion.go)
		args = permuteArgs(app, args)
	}
	err := app.Run(args)
	if err == nil {
		return ExitOK
	}
	fmt.Fprintln(stderr, "tripass: "+errorLine(err))
	return exitCode(err)
}
