// Command tauvox computes quantitative relaxation-time maps (T1, T2, T2*)
// from MR series, with uncertainty, fit quality and failure codes.
//
// Usage:
//
//	tauvox fit SERIES --model M --out DIR [options]
//	tauvox simulate --kind K --out DIR [options]
//	tauvox demo [--out DIR]
//	tauvox version
//
// Run "tauvox help" or "tauvox COMMAND --help" for details. Exit codes: 0
// success, 1 the work ran but found problems, 2 bad usage or bad input,
// 130 interrupted.
package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime/debug"
	"sync"
	"syscall"

	"github.com/tauvox/tauvox/internal/output"
)

func main() {
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	// The first signal cancels ctx: the command stops its workers, removes
	// its temporary files and exits 130. Then the default action is
	// restored, so a second Ctrl-C ends at once a command that does not
	// watch ctx (its hidden temporary folder is then left behind).
	go func() {
		<-ctx.Done()
		stop()
	}()
	code := run(ctx, os.Args[1:], os.Stdout, os.Stderr)
	stop()
	os.Exit(code)
}

// command is one sub-command.
type command struct {
	name    string
	summary string
	run     func(ctx context.Context, args []string, env *env) error
}

// env carries the streams of one invocation.
type env struct {
	stdout, stderr io.Writer
	// terminal reports whether stderr is an interactive terminal (for
	// progress bars).
	terminal bool
}

func commands() []command {
	return []command{
		{"scan", "list the series under folders (DICOM, NIfTI) with a suggested model", runScan},
		{"fit", "fit a model to a series and write maps", runFit},
		{"batch", "fit every relaxometry series of a BIDS dataset into a derivative dataset", runBatch},
		{"validate", "Monte Carlo accuracy and precision of a model and protocol against the CRLB", runValidate},
		{"simulate", "write a synthetic series of the demo phantom with known truth", runSimulate},
		{"roi", "statistics of maps inside regions (spheres or a label image)", runROI},
		{"phantom", "measure phantom vials against their reference and give a QA verdict", runPhantom},
		{"history", "record QA sessions in SQLite; control charts and drift per year", runHistory},
		{"convert", "write a series or protocol as one 4-D NIfTI with its BIDS sidecar", runConvert},
		{"export", "write maps as DICOM Parametric Map series for a PACS", runExport},
		{"preview", "draw PNG montages of maps with a colour bar and units", runPreview},
		{"demo", "run simulate and fit on built-in data and print per-vial results", runDemo},
		{"version", "print the version", runVersion},
		{"completion", "print a shell completion script (bash or zsh)", runCompletion},
		{"help", "show help for a command", nil},
	}
}

// exitError carries an exit code other than 2 for an error.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// errQuiet ends a command with an exit code but nothing more to print.
var errHelp = errors.New("help requested")

// run executes one invocation and returns the exit code.
func run(ctx context.Context, args []string, stdout, stderr io.Writer) int {
	e := &env{stdout: stdout, stderr: stderr, terminal: isTerminal(stderr)}
	if len(args) == 0 {
		usage(stderr)
		return 2
	}
	name := args[0]
	if name == "-h" || name == "--help" || name == "help" {
		if len(args) > 1 && name == "help" {
			if helpTopic(args[1], stdout) {
				return 0
			}
			return run(ctx, []string{args[1], "--help"}, stdout, stderr)
		}
		usage(stdout)
		return 0
	}
	for _, c := range commands() {
		if c.name != name || c.run == nil {
			continue
		}
		err := c.run(ctx, args[1:], e)
		switch {
		case err == nil:
			return 0
		case errors.Is(err, errHelp):
			return 0
		case ctx.Err() != nil && errors.Is(err, ctx.Err()):
			fmt.Fprintln(stderr, "tauvox: interrupted; no output was written")
			return 130
		}
		var ee *exitError
		if errors.As(err, &ee) {
			if ee.err != nil {
				fmt.Fprintln(stderr, "tauvox "+name+": "+oneLine(ee.err.Error()))
			}
			return ee.code
		}
		fmt.Fprintln(stderr, "tauvox "+name+": "+oneLine(err.Error()))
		return 2
	}
	fmt.Fprintf(stderr, "tauvox: unknown command %q; run 'tauvox help'\n", name)
	return 2
}

// oneLine is text from a file or an error made fit for one terminal line
// (output.Cell: one line, no control or format character).
func oneLine(s string) string { return output.Cell(s) }

func usage(w io.Writer) {
	fmt.Fprintln(w, "tauvox: quantitative relaxation-time maps (T1, T2, T2*) from MR series.")
	fmt.Fprintln(w, "A quality-assurance and research tool, not a medical device.")
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Usage: tauvox COMMAND [arguments]")
	fmt.Fprintln(w)
	for _, c := range commands() {
		fmt.Fprintf(w, "  %-10s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Run 'tauvox COMMAND --help' for the options of a command.")
	fmt.Fprintln(w, helpTopicsLine())
	fmt.Fprintln(w, "Exit codes: 0 success, 1 problems found, 2 bad usage or input, 130 interrupted.")
}

// version returns the module version of the build.
func version() string {
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

func runVersion(_ context.Context, args []string, e *env) error {
	fs := newFlags("version", "", "print the version of tauvox", e)
	if err := parse(fs, args, nil); err != nil {
		return err
	}
	fmt.Fprintln(e.stdout, "tauvox", version())
	return nil
}

// helpText holds the --help printer of each FlagSet made by newFlags until
// it is parsed.
var (
	helpMu   sync.Mutex
	helpText = map[*flag.FlagSet]func(){}
)

// newFlags makes a FlagSet whose usage text goes to stdout on --help only
// (a parse error is one line on stderr, without the usage).
func newFlags(name, args, summary string, e *env) *flag.FlagSet {
	fs := flag.NewFlagSet(name, flag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.Usage = func() {}
	helpMu.Lock()
	defer helpMu.Unlock()
	helpText[fs] = func() {
		w := e.stdout
		fmt.Fprintf(w, "Usage: tauvox %s %s\n\n%s\n\nOptions:\n", name, args, summary)
		fs.SetOutput(w)
		fs.PrintDefaults()
		fs.SetOutput(io.Discard)
	}
	return fs
}

// parse parses flags that may come before or after the positional
// arguments, which it appends to *pos (pos nil: none allowed).
func parse(fs *flag.FlagSet, args []string, pos *[]string) error {
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
				return errHelp
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
