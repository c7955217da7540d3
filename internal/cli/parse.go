package cli

import (
	"errors"
	"flag"
	"fmt"
	"io"
	"runtime/debug"
	"sync"
)

// ErrHelp is returned by Parse after it printed a command's --help.
var ErrHelp = errors.New("help requested")

// helpText holds the --help printer of each FlagSet made by NewFlags until
// it is parsed.
var (
	helpMu   sync.Mutex
	helpText = map[*flag.FlagSet]func(){}
)

// NewFlags makes a FlagSet whose usage text goes to w on --help only (a
// parse error is one line, without the usage).
func NewFlags(name, args, summary string, w io.Writer) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {}
	helpMu.Lock()
	defer helpMu.Unlock()
	helpText[fs] = func() {
		fmt.Fprintf(w, "Usage: tauvox %s %s\n\n%s\n\nOptions:\n", name, args, summary)
		fs.SetOutput(w)
		fs.PrintDefaults()
		fs.SetOutput(io.Discard)
	}
	return fs
}

// SetHelp replaces the --help printer of a FlagSet made by NewFlags.
func SetHelp(fs *flag.FlagSet, help func()) {
	helpMu.Lock()
	defer helpMu.Unlock()
	helpText[fs] = help
}

// Parse parses flags that may come before or after the positional
// arguments, which it appends to *pos (pos nil: none allowed). On --help
// it prints the FlagSet's usage and returns ErrHelp.
func Parse(fs *flag.FlagSet, args []string, pos *[]string) error {
	helpMu.Lock()
	help := helpText[fs]
	delete(helpText, fs)
	helpMu.Unlock()
	for {
		if err := fs.Parse(args); err != nil {
			if errors.Is(err, flag.ErrHelp) {
				if help != nil {
					help()
				}
				return ErrHelp
			}
			return fmt.Errorf("%v (see --help)", err)
		}
		rest := fs.Args()
		if len(rest) == 0 {
			return nil
		}
		if pos == nil {
			return fmt.Errorf("unexpected argument %q (see --help)", rest[0])
		}
		if rest[0] == "--" {
			*pos = append(*pos, rest[1:]...)
			return nil
		}
		*pos = append(*pos, rest[0])
		args = rest[1:]
	}
}

// Version returns the module version of the build ("devel" or
// "devel-REVISION" for a build from a checkout).
func Version() string {
	if bi, ok := debug.ReadBuildInfo(); ok {
		v := bi.Main.Version
		if v != "" && v != "(devel)" {
			return v
		}
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" && len(s.Value) >= 12 {
				return "devel-" + s.Value[:12]
			}
		}
	}
	return "devel"
}
