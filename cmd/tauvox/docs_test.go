package main

import (
	"bufio"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// TestDocsMentionRealFlags parses README.md and docs/*.md for commands
// written as "tauvox COMMAND ... --flag" (in fenced code blocks, joining
// lines continued with '\', and in inline code spans) and checks that every
// command exists and every flag is one its --help lists.
func TestDocsMentionRealFlags(t *testing.T) {
	files, _ := filepath.Glob(filepath.Join("..", "..", "docs", "*.md"))
	files = append([]string{filepath.Join("..", "..", "README.md")}, files...)
	inline := regexp.MustCompile("`([^`]*)`")
	checked := 0
	for _, path := range files {
		f, err := os.Open(path)
		if err != nil {
			t.Fatal(err)
		}
		sc := bufio.NewScanner(f)
		inBlock, data, n, cont := false, false, 0, ""
		for sc.Scan() {
			n++
			line := sc.Text()
			if fence := strings.TrimSpace(line); strings.HasPrefix(fence, "```") {
				inBlock = !inBlock
				// Blocks of data (JSON, CSV) hold no command lines.
				lang := strings.TrimPrefix(fence, "```")
				data = inBlock && (lang == "json" || lang == "csv" || lang == "text" || lang == "tsv")
				continue
			}
			if data {
				continue
			}
			var cmds []string
			if inBlock {
				line = cont + line
				if strings.HasSuffix(line, `\`) {
					cont = strings.TrimSuffix(line, `\`) + " "
					continue
				}
				cont = ""
				if i := strings.Index(line, " #"); i >= 0 {
					line = line[:i]
				}
				if strings.HasPrefix(strings.TrimSpace(line), "#") {
					continue
				}
				cmds = append(cmds, line)
			} else {
				for _, m := range inline.FindAllStringSubmatch(line, -1) {
					if strings.Contains(m[1], "tauvox ") {
						cmds = append(cmds, m[1])
					}
				}
			}
			for _, c := range cmds {
				checked += checkMention(t, path, n, c)
			}
		}
		f.Close()
	}
	if checked < 20 {
		t.Errorf("only %d mentions checked; is the parser still finding them?", checked)
	}
	// The help topics (tauvox help TOPIC): every line that names a command.
	topics, _ := filepath.Glob(filepath.Join("help", "*.txt"))
	inHelp := 0
	for _, path := range topics {
		b, err := os.ReadFile(path)
		if err != nil {
			t.Fatal(err)
		}
		for n, line := range strings.Split(string(b), "\n") {
			inHelp += checkMention(t, path, n+1, line)
		}
	}
	if inHelp < 5 {
		t.Errorf("only %d mentions checked in the help topics", inHelp)
	}
}

var wordTauvox = regexp.MustCompile(`(?:^|[\s/("'=])tauvox\s+([a-z][a-z0-9-]*)((?:\s+[^\s|;&]+)*)`)

// checkMention checks every "tauvox COMMAND args" of one line of text and
// returns how many it checked.
func checkMention(t *testing.T, path string, line int, text string) int {
	t.Helper()
	n := 0
	for _, m := range wordTauvox.FindAllStringSubmatch(text, -1) {
		cmd, args := m[1], strings.Fields(m[2])
		flags, ok := commandFlags(cmd)
		if !ok {
			t.Errorf("%s:%d: %q: no command %q", path, line, text, cmd)
			continue
		}
		where := cmd
		if subs := subcommands[cmd]; subs != nil && (len(args) == 0 || strings.HasPrefix(args[0], "-")) {
			// "tauvox history --db FILE": the flags of any sub-command.
			for _, s := range subs {
				f, _ := commandFlags(cmd, s)
				flags = append(flags, f...)
			}
		} else if subs != nil {
			for _, s := range subs {
				if args[0] == s {
					where = cmd + " " + s
					flags, _ = commandFlags(cmd, s)
					args = args[1:]
					break
				}
			}
		}
		have := map[string]bool{"--help": true}
		for _, f := range flags {
			have[f] = true
		}
		for _, a := range args {
			if a == "tauvox" || strings.HasSuffix(a, "/tauvox") {
				break // the next command on the line is matched on its own
			}
			if !strings.HasPrefix(a, "--") || a == "--" {
				continue
			}
			f, _, _ := strings.Cut(a, "=")
			f = strings.TrimRight(f, ".,:)`'\"")
			if !have[f] {
				t.Errorf("%s:%d: %q: tauvox %s has no flag %s", path, line, text, where, f)
			}
		}
		n++
	}
	return n
}
