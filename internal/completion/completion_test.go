package completion

import (
	"bytes"
	"flag"
	"fmt"
	"slices"
	"strings"
	"testing"
)

// TestFlags: the flags come from what flag.FlagSet's PrintDefaults writes,
// whatever their type, sorted and with "--"; indented text is not a flag.
func TestFlags(t *testing.T) {
	fs := flag.NewFlagSet("x", flag.ContinueOnError)
	fs.String("out", "", "output\n  -not-a-flag in a wrapped usage line")
	fs.Bool("force", false, "replace")
	fs.Float64("min-drift", 1, "smallest drift")
	var b bytes.Buffer
	fs.SetOutput(&b)
	fs.PrintDefaults()
	if got, want := Flags("Usage: tauvox x\n\nOptions:\n"+b.String()), []string{"--force", "--min-drift", "--out"}; !slices.Equal(got, want) {
		t.Errorf("Flags = %v, want %v\n%s", got, want, b.String())
	}
}

// TestBash: words, sub-commands and flags land in their cases, the caller's
// flag lists are not changed, and zsh wraps the same script.
func TestBash(t *testing.T) {
	fl := make([]string, 1, 4)
	fl[0] = "--out"
	cmds := []Command{{Name: "fit", Flags: fl}, {Name: "history", Subs: []Command{{Name: "add", Flags: []string{"--db"}}}},
		{Name: "completion", Words: []string{"bash", "zsh"}}}
	s := Bash(cmds, []string{"t2", "t1-ir"})
	for _, want := range []string{
		`compgen -W "fit history completion"`, `compgen -W "t2 t1-ir"`, `fit) flags="--out --help" ;;`,
		`add) flags="--db --help" ;;`, `compgen -W "add"`, `completion) COMPREPLY=( $(compgen -W "bash zsh" -- "$cur") ); return ;;`,
		"complete -o default -o filenames -F _tauvox tauvox\n",
	} {
		if !strings.Contains(s, want) {
			t.Errorf("script lacks %q", want)
		}
	}
	if fl[:2][1] != "" {
		t.Errorf("Bash wrote into the caller's flag list: %q", fl[:2])
	}
	if z := Zsh(cmds, nil); !strings.HasPrefix(z, "#compdef tauvox\n") || !strings.HasSuffix(z, Bash(cmds, nil)) {
		t.Error("zsh script is not the bash script behind bashcompinit")
	}
}

// TestTable: each kind of command gets its completion, and help lists the
// topics that are not commands after the command names.
func TestTable(t *testing.T) {
	flags := func(path ...string) ([]string, bool) {
		switch strings.Join(path, " ") {
		case "fit":
			return []string{"--out"}, true
		case "history add":
			return []string{"--db"}, true
		case "help", "completion", "history":
			return nil, true
		}
		return nil, false
	}
	got := Table([]string{"fit", "history", "completion", "help"}, map[string][]string{"history": {"add"}}, []string{"fit", "models"}, flags)
	want := []Command{{Name: "fit", Flags: []string{"--out"}}, {Name: "history", Subs: []Command{{Name: "add", Flags: []string{"--db"}}}},
		{Name: "completion", Words: []string{"bash", "zsh"}}, {Name: "help", Words: []string{"fit", "history", "completion", "help", "models"}}}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("Table =\n%v\nwant\n%v", got, want)
	}
}
