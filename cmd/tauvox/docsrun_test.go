package main

import (
	"bufio"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// docCommand is one tauvox command of a document's shell blocks.
type docCommand struct {
	line int
	args []string // without the leading tauvox
	one  bool     // exit code 1 is documented for it
}

// docCommands returns, in order, the tauvox commands of the ```sh blocks
// of a Markdown file: continuation lines joined, comments removed, `for V
// in A B; do … done` loops unrolled with $V replaced. Lines that are not
// tauvox commands (make) are skipped. A command accepts exit code 1 when
// its comment or the comment lines right after it say "exit code 1".
func docCommands(t *testing.T, path string) []docCommand {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	var out []docCommand
	sc := bufio.NewScanner(f)
	inBlock, n, cont := false, 0, ""
	var loopVar string
	var loopVals []string
	var loopBody []docCommand
	forRE := regexp.MustCompile(`^for (\w+) in ([^;]+); do$`)
	add := func(c docCommand) {
		if loopVar != "" {
			loopBody = append(loopBody, c)
			return
		}
		out = append(out, c)
	}
	for sc.Scan() {
		n++
		line := sc.Text()
		trim := strings.TrimSpace(line)
		if strings.HasPrefix(trim, "```") {
			inBlock = !inBlock && (trim == "```sh" || trim == "```bash")
			continue
		}
		if !inBlock {
			continue
		}
		line = cont + line
		if strings.HasSuffix(line, `\`) {
			cont = strings.TrimSuffix(line, `\`) + " "
			continue
		}
		cont = ""
		code, comment, _ := strings.Cut(line, "#")
		code = strings.TrimSpace(code)
		if code == "" {
			if strings.Contains(comment, "exit code 1") && len(out) > 0 {
				out[len(out)-1].one = true
			}
			continue
		}
		if m := forRE.FindStringSubmatch(code); m != nil {
			loopVar, loopVals, loopBody = m[1], strings.Fields(m[2]), nil
			continue
		}
		if code == "done" {
			for _, v := range loopVals {
				for _, c := range loopBody {
					args := make([]string, len(c.args))
					for i, a := range c.args {
						args[i] = strings.ReplaceAll(a, "$"+loopVar, v)
					}
					out = append(out, docCommand{line: c.line, args: args, one: c.one})
				}
			}
			loopVar = ""
			continue
		}
		words := strings.Fields(code)
		if words[0] != "tauvox" && words[0] != "bin/tauvox" {
			if words[0] != "make" {
				t.Errorf("%s:%d: %q is neither a tauvox nor a make command", path, n, code)
			}
			continue
		}
		add(docCommand{line: n, args: words[1:], one: strings.Contains(comment, "exit code 1")})
	}
	return out
}

// TestDocsExamplesRun (issue 17): every command of README.md's "Use"
// block and of docs/user-guide.md runs as written, in order, in an empty
// folder, and exits 0 (or 1 where the text documents it). The inputs the
// documents name as the user's own come from the documents too:
// regions.csv is the region list of docs/formats.md, study/ the committed
// BIDS test dataset.
func TestDocsExamplesRun(t *testing.T) {
	root, _ := filepath.Abs(filepath.Join("..", ".."))
	docs := []string{filepath.Join(root, "README.md"), filepath.Join(root, "docs", "user-guide.md")}
	formats, err := os.ReadFile(filepath.Join(root, "docs", "formats.md"))
	if err != nil {
		t.Fatal(err)
	}
	csv := regexp.MustCompile("(?s)## Region list.*?```csv\n(.*?)```").FindSubmatch(formats)
	if csv == nil {
		t.Fatal("docs/formats.md: no region list example")
	}
	bids := filepath.Join(root, "testdata", "bids")
	for _, doc := range docs {
		cmds := docCommands(t, doc)
		t.Run(filepath.Base(doc), func(t *testing.T) {
			if len(cmds) < 10 {
				t.Fatalf("only %d commands found", len(cmds))
			}
			dir := t.TempDir()
			t.Chdir(dir)
			if err := os.WriteFile("regions.csv", csv[1], 0o644); err != nil {
				t.Fatal(err)
			}
			copied := copyTree(t, bids)
			if err := os.Rename(copied, filepath.Join(dir, "study")); err != nil {
				t.Fatal(err)
			}
			for _, c := range cmds {
				code, _, stderr := tauvox(t, c.args...)
				if code != 0 && !(code == 1 && c.one) {
					t.Errorf("%s:%d: tauvox %s: exit %d\n%s", filepath.Base(doc), c.line, strings.Join(c.args, " "), code, stderr)
				}
			}
			t.Logf("%d commands ran", len(cmds))
		})
	}
}
