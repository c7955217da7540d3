package main

import (
	"bytes"
	"context"
	"fmt"

	"github.com/tauvox/tauvox/fit"
	"github.com/tauvox/tauvox/internal/completion"
)

// subcommands lists the sub-commands of the commands that have them.
// TestCompletionSubcommands checks it against the commands' own errors.
var subcommands = map[string][]string{
	"history": {"add", "list", "export", "remove", "chart"},
}

// commandFlags returns the flags a command (or "history add") accepts, as
// its --help text lists them (the FlagSet's PrintDefaults), with "--".
// So completion and the docs check follow the FlagSets by themselves.
func commandFlags(path ...string) ([]string, bool) {
	for _, c := range commands() {
		if c.name != path[0] {
			continue
		}
		if c.run == nil {
			return nil, true // "help" has no flags
		}
		var out bytes.Buffer
		c.run(context.Background(), append(append([]string(nil), path[1:]...), "--help"), &env{stdout: &out, stderr: &bytes.Buffer{}})
		return completion.Flags(out.String()), true
	}
	return nil, false
}

func runCompletion(_ context.Context, args []string, e *env) error {
	fs := newFlags("completion", "bash|zsh", `Prints a completion script for commands, sub-commands and flags.
  bash:  source <(tauvox completion bash)     (or save it in /etc/bash_completion.d/)
  zsh:   source <(tauvox completion zsh)      (uses zsh's bashcompinit)`, e)
	var pos []string
	if err := parse(fs, args, &pos); err != nil {
		return err
	}
	if len(pos) != 1 || pos[0] != "bash" && pos[0] != "zsh" {
		return fmt.Errorf("give the shell: bash or zsh")
	}
	var names, models []string
	for _, c := range commands() {
		names = append(names, c.name)
	}
	for _, m := range fit.Models() {
		models = append(models, m.Name)
	}
	script := completion.Bash
	if pos[0] == "zsh" {
		script = completion.Zsh
	}
	fmt.Fprint(e.stdout, script(completion.Table(names, subcommands, helpTopics(), commandFlags), models))
	return nil
}
