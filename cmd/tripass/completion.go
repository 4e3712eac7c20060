package main

import (
	"io"

	"github.com/urfave/cli/v2"
)

var completionCommand = &cli.Command{
	Name:      "completion",
	Usage:     "print a shell script that completes tripass's commands and flags (bash or zsh)",
	ArgsUsage: "bash|zsh",
	Description: `Prints a completion script for the shell named. Once loaded, pressing Tab after
'tripass ' lists the commands, after 'tripass smooth --' the flags of smooth, and
elsewhere file names. The script asks tripass itself (its hidden
--generate-bash-completion flag), so it stays right as commands change.

Examples:
   source <(tripass completion bash)                  # this bash session
   tripass completion bash > ~/.local/share/bash-completion/completions/tripass
   tripass completion zsh > "${fpath[1]}/_tripass"    # then start a new zsh`,
	Action: completionAction,
}

func init() { register(completionCommand) }

func completionAction(c *cli.Context) error {
	if c.NArg() != 1 {
		return usageErrorf("completion takes one argument, bash or zsh")
	}
	switch c.Args().First() {
	case "bash":
		io.WriteString(c.App.Writer, bashCompletion)
	case "zsh":
		io.WriteString(c.App.Writer, zshCompletion)
	default:
		return usageErrorf("completion %q: want bash or zsh", c.Args().First())
	}
	return nil
}

// bashCompletion asks tripass for the words that may follow what is typed: with the
// word under the cursor when it starts with "-" (flags), without it otherwise
// (commands). When tripass offers nothing, bash completes file names (-o default);
// after the command, the help subcommand urfave/cli adds to each command is left out so
// that file names come.
const bashCompletion = `# bash completion for tripass (tripass completion bash)
_tripass_words() {
    local cur=${COMP_WORDS[COMP_CWORD]}
    local -a typed=("${COMP_WORDS[@]:1:COMP_CWORD-1}")
    local offered
    if [[ $cur == -* ]]; then
        offered=$("${COMP_WORDS[0]}" "${typed[@]}" "$cur" --generate-bash-completion 2>/dev/null)
    else
        offered=$("${COMP_WORDS[0]}" "${typed[@]}" --generate-bash-completion 2>/dev/null)
    fi
    if (( COMP_CWORD > 1 )); then
        # Past the command, "help" is no answer: leave the word to file names.
        offered=$(printf '%s\n' "$offered" | grep -vxE 'help|h')
    fi
    local IFS=$'\n'
    COMPREPLY=($(compgen -W "$offered" -- "$cur"))
}
complete -o default -o bashdefault -F _tripass_words tripass
`

// zshCompletion does the same for zsh; _CLI_ZSH_AUTOCOMPLETE_HACK asks urfave/cli for
// "name:description" lines, which _describe shows beside each command.
const zshCompletion = `#compdef tripass
# zsh completion for tripass (tripass completion zsh)
_tripass_words() {
    local cur=${words[CURRENT]}
    local -a typed offered
    typed=(${words[2,CURRENT-1]})
    if [[ $cur == -* ]]; then
        offered=(${(f)"$(_CLI_ZSH_AUTOCOMPLETE_HACK=1 ${words[1]} ${typed[@]} $cur --generate-bash-completion 2>/dev/null)"})
    else
        offered=(${(f)"$(_CLI_ZSH_AUTOCOMPLETE_HACK=1 ${words[1]} ${typed[@]} --generate-bash-completion 2>/dev/null)"})
    fi
    if (( CURRENT > 2 )); then
        offered=(${offered:#(help|h):*})
    fi
    if (( ${#offered} )); then
        _describe -t tripass 'tripass' offered && return
    fi
    _files
}
if [[ $zsh_eval_context[-1] == loadautofunc ]]; then
    _tripass_words "$@"
else
    compdef _tripass_words tripass
fi
`

// completionFlag is the flag urfave/cli answers with the words that may come next.
const completionFlag = "--generate-bash-completion"

// completing reports whether args ask for completions. Their order must then stay as
// typed: urfave/cli looks for the flag at the end, and at the word before it.
func completing(args []string) bool {
	return len(args) > 1 && args[len(args)-1] == completionFlag
}
