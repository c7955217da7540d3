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
	var run func(context.Context, []string, *env) error
	found := false
	for _, c := range commands() {
		if c.name == path[0] {
			run, found = c.run, true
		}
	}
	if run == nil {
		return nil, found // "help" has no flags
	}
	var out bytes.Buffer
	e := &env{stdout: &out, stderr: &bytes.Buffer{}}
	run(context.Background(), append(append([]string(nil), path[1:]...), "--help"), e)
	return completion.Flags(out.String()), true
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
	var cmds []completion.Command
	for _, c := range commands() {
		cc := completion.Command{Name: c.name}
		switch {
		case c.name == "help":
			cc.Words = append([]string(nil), names...)
			for _, t := range helpTopics() {
				if _, isCmd := commandFlags(t); !isCmd {
					cc.Words = append(cc.Words, t)
				}
			}
		case c.name == "completion":
			cc.Words = []string{"bash", "zsh"}
		case subcommands[c.name] != nil:
			for _, s := range subcommands[c.name] {
				f, _ := commandFlags(c.name, s)
				cc.Subs = append(cc.Subs, completion.Command{Name: s, Flags: f})
			}
		default:
			cc.Flags, _ = commandFlags(c.name)
		}
		cmds = append(cmds, cc)
	}
	script := completion.Bash
	if pos[0] == "zsh" {
		script = completion.Zsh
	}
	fmt.Fprint(e.stdout, script(cmds, models))
	return nil
}
