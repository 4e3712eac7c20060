package main

import (
	"strings"

	"github.com/urfave/cli/v2"
)

// permuteArgs moves the flags of the command being run in front of its positional
// arguments, so that "tripass info STACK --json" means the same as
// "tripass info --json STACK". urfave/cli v2 stops parsing flags at the first
// positional argument; users type both orders. A "--" ends the flags as usual.
func permuteArgs(app *cli.App, args []string) []string {
	if len(args) < 2 {
		return args
	}
	out := []string{args[0]}
	rest := args[1:]
	// Global flags and the command path come first, as typed.
	cmds := app.Commands
	var cmd *cli.Command
	for len(rest) > 0 {
		a := rest[0]
		if strings.HasPrefix(a, "-") {
			out = append(out, a)
			rest = rest[1:]
			continue
		}
		var next *cli.Command
		for _, c := range cmds {
			if c.HasName(a) {
				next = c
			}
		}
		if next == nil {
			break
		}
		cmd = next
		out = append(out, a)
		rest = rest[1:]
		cmds = cmd.Subcommands
		if len(cmds) == 0 {
			break
		}
	}
	if cmd == nil {
		return args
	}
	var flags, positional []string
	for i := 0; i < len(rest); i++ {
		a := rest[i]
		if a == "--" {
			positional = append(positional, rest[i+1:]...)
			break
		}
		if !strings.HasPrefix(a, "-") || a == "-" {
			positional = append(positional, a)
			continue
		}
		flags = append(flags, a)
		name := strings.TrimLeft(a, "-")
		if strings.Contains(name, "=") {
			continue
		}
		if takesValue(cmd, name) && i+1 < len(rest) {
			flags = append(flags, rest[i+1])
			i++
		}
	}
	out = append(out, flags...)
	if len(positional) > 0 {
		out = append(out, "--")
		out = append(out, positional...)
	}
	return out
}

// takesValue reports whether the flag called name on cmd expects a value.
func takesValue(cmd *cli.Command, name string) bool {
	for _, f := range cmd.Flags {
		for _, n := range f.Names() {
			if n != name {
				continue
			}
			if dg, ok := f.(cli.DocGenerationFlag); ok {
				return dg.TakesValue()
			}
			return true
		}
	}
	return false
}
