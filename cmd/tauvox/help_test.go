package main

import (
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

func TestHelpTopics(t *testing.T) {
	want := []string{"exit-codes", "formats", "history", "models", "noise", "phantom"}
	if got := strings.Join(helpTopics(), " "); got != strings.Join(want, " ") {
		t.Errorf("topics %s", got)
	}
	for _, topic := range want {
		code, stdout, _ := tauvox(t, "help", topic)
		if code != 0 || len(stdout) < 200 {
			t.Errorf("help %s: %d, %d bytes", topic, code, len(stdout))
		}
	}
	if _, stdout, _ := tauvox(t, "help", "models"); !strings.Contains(stdout, "t1-vfa") {
		t.Errorf("models: %s", stdout)
	}
	// A command name still gives the command's help.
	if code, stdout, _ := tauvox(t, "help", "batch"); code != 0 || !strings.Contains(stdout, "-participant-label") {
		t.Errorf("help batch: %d %s", code, stdout)
	}
	if code, stdout, _ := tauvox(t, "help"); code != 0 || !strings.Contains(stdout, "Topics: tauvox help exit-codes|") {
		t.Errorf("usage: %s", stdout)
	}
}

// TestCompletion: the scripts name every command, the flags of each
// FlagSet and the history sub-commands; bash parses the script when it is
// installed.
func TestCompletion(t *testing.T) {
	code, bash, _ := tauvox(t, "completion", "bash")
	if code != 0 {
		t.Fatal(code)
	}
	for _, c := range commands() {
		if !strings.Contains(bash, " "+c.name+")") {
			t.Errorf("bash script lacks %s", c.name)
		}
	}
	for _, frag := range []string{"--participant-label", "--keep-identifiers", "--range", "--skip-echoes", "chart) flags=\"--baseline", "t2-epg"} {
		if !strings.Contains(bash, frag) {
			t.Errorf("bash script lacks %q", frag)
		}
	}
	code, zsh, _ := tauvox(t, "completion", "zsh")
	if code != 0 || !strings.HasPrefix(zsh, "#compdef tauvox\n") || !strings.HasSuffix(zsh, bash) {
		t.Errorf("zsh script:\n%s", zsh)
	}
	if code, _, stderr := tauvox(t, "completion", "fish"); code != 2 || !strings.Contains(stderr, "bash or zsh") {
		t.Errorf("fish: %d %s", code, stderr)
	}
	if sh, err := exec.LookPath("bash"); err == nil {
		p := filepath.Join(t.TempDir(), "c.sh")
		os.WriteFile(p, []byte(bash), 0o644)
		if out, err := exec.Command(sh, "-n", p).CombinedOutput(); err != nil {
			t.Errorf("bash -n: %v %s", err, out)
		}
	}
}

// TestCompletionSubcommands keeps the table of sub-commands in step with
// the commands: the list in the error for an unknown sub-command.
func TestCompletionSubcommands(t *testing.T) {
	for cmd, subs := range subcommands {
		_, _, stderr := tauvox(t, cmd, "no-such-sub")
		m := regexp.MustCompile(`\(([a-z, -]+)\)`).FindStringSubmatch(stderr)
		if m == nil || m[1] != strings.Join(subs, ", ") {
			t.Errorf("%s: table %v, command says %q", cmd, subs, stderr)
		}
	}
}
