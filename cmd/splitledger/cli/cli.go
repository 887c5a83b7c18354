// Package cli is splitledger's command line: a table of subcommands, each
// parsing its flags, calling the storage, importance and audit packages,
// and handing a plain result to a renderer. Exit codes: 0 pass or warn,
// 1 gate failed, 2 bad usage or bad input, 3 internal error.
package cli

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime/debug"
	"strings"

	"github.com/spf13/pflag"
)

// Version is the program version printed by --version.
const Version = "0.1.0"

// Exit codes.
const (
	ExitOK       = 0
	ExitGate     = 1
	ExitBadInput = 2
	ExitInternal = 3
)

// command is one row of the subcommand table.
type command struct {
	name    string
	summary string
	usage   string
	// flags declares the command's flags on fs and returns the function
	// that runs it once fs has parsed the arguments.
	flags func(fs *pflag.FlagSet) func(env *env, args []string) error
}

// env is what a command may touch.
type env struct {
	stdout, stderr io.Writer
	// stderrTTY is true when progress lines may be drawn.
	stderrTTY bool
}

// gateError carries exit code 1 (the verdict failed the gate).
type gateError struct{ verdict string }

func (g gateError) Error() string { return "gate: verdict " + g.verdict }

// internalError carries exit code 3.
type internalError struct{ err error }

func (e internalError) Error() string { return "internal error: " + e.err.Error() }
func (e internalError) Unwrap() error { return e.err }

// usageError is a bad command line (exit 2, with a hint to --help).
type usageError struct{ msg string }

func (u usageError) Error() string { return u.msg }

func usagef(format string, a ...any) error { return usageError{fmt.Sprintf(format, a...)} }

func commands() []command {
	return []command{
		inspectCommand(),
		scoreCommand(),
		importanceCommand(),
		explainCommand(),
		compareCommand(),
		demoCommand(),
		historyCommand(),
	}
}

// Run runs splitledger with args (without the program name) and returns the
// exit code. Nothing is written outside stdout and stderr except files the
// user names.
func Run(args []string, stdout, stderr io.Writer) (code int) {
	defer func() {
		if p := recover(); p != nil {
			fmt.Fprintf(stderr, "splitledger: internal error: %v\n%s", p, debug.Stack())
			code = ExitInternal
		}
	}()
	e := &env{stdout: stdout, stderr: stderr, stderrTTY: isTerminal(stderr)}
	cmds := commands()
	if len(args) == 0 {
		mainHelp(stderr, cmds)
		return ExitBadInput
	}
	switch args[0] {
	case "-h", "--help":
		mainHelp(stdout, cmds)
		return ExitOK
	case "--version", "version":
		fmt.Fprintf(stdout, "splitledger %s\n", Version)
		return ExitOK
	case "help":
		if len(args) == 1 {
			mainHelp(stdout, cmds)
			return ExitOK
		}
		for _, c := range cmds {
			if c.name == args[1] {
				fs := newFlagSet(c)
				c.flags(fs)
				commandHelp(stdout, c, fs)
				return ExitOK
			}
		}
		fmt.Fprintf(stderr, "splitledger: unknown command %q (see splitledger --help)\n", args[1])
		return ExitBadInput
	}
	for _, c := range cmds {
		if c.name != args[0] {
			continue
		}
		fs := newFlagSet(c)
		runFn := c.flags(fs)
		if err := fs.Parse(args[1:]); err != nil {
			if errors.Is(err, pflag.ErrHelp) {
				commandHelp(stdout, c, fs)
				return ExitOK
			}
			fmt.Fprintf(stderr, "splitledger %s: %v (see splitledger help %s)\n", c.name, err, c.name)
			return ExitBadInput
		}
		return exitCode(stderr, c.name, runFn(e, fs.Args()))
	}
	fmt.Fprintf(stderr, "splitledger: unknown command %q (see splitledger --help)\n", args[0])
	return ExitBadInput
}

func exitCode(stderr io.Writer, name string, err error) int {
	if err == nil {
		return ExitOK
	}
	var g gateError
	if errors.As(err, &g) {
		return ExitGate
	}
	msg := strings.ReplaceAll(err.Error(), "\n", " ")
	var ie internalError
	if errors.As(err, &ie) {
		fmt.Fprintf(stderr, "splitledger %s: %s\n", name, msg)
		return ExitInternal
	}
	var ue usageError
	if errors.As(err, &ue) {
		fmt.Fprintf(stderr, "splitledger %s: %s (see splitledger help %s)\n", name, msg, name)
		return ExitBadInput
	}
	fmt.Fprintf(stderr, "splitledger %s: %s\n", name, msg)
	return ExitBadInput
}

func newFlagSet(c command) *pflag.FlagSet {
	fs := pflag.NewFlagSet(c.name, pflag.ContinueOnError)
	fs.SetOutput(io.Discard)
	fs.SortFlags = false
	return fs
}

func mainHelp(w io.Writer, cmds []command) {
	fmt.Fprintf(w, "splitledger %s: how each input feature's role changed between two tree-model versions\n\n", Version)
	fmt.Fprintln(w, "Usage: splitledger COMMAND [flags] [args]")
	fmt.Fprintln(w, "\nCommands:")
	for _, c := range cmds {
		fmt.Fprintf(w, "  %-11s %s\n", c.name, c.summary)
	}
	fmt.Fprintln(w, "\nRun 'splitledger help COMMAND' for a command's flags. Exit codes: 0 pass/warn, 1 gate failed, 2 bad usage or input, 3 internal error.")
}

func commandHelp(w io.Writer, c command, fs *pflag.FlagSet) {
	fmt.Fprintf(w, "splitledger %s: %s\n\nUsage: splitledger %s\n\nFlags:\n", c.name, c.summary, c.usage)
	fs.SetOutput(w)
	fs.PrintDefaults()
	fs.SetOutput(io.Discard)
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// writeOutput renders into path atomically (temporary file in the same
// folder, then rename) or into stdout when path is "" or "-".
func writeOutput(e *env, path string, render func(io.Writer) error) error {
	if path == "" || path == "-" {
		return render(e.stdout)
	}
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("--out %s: %w", path, err)
	}
	defer os.Remove(tmp.Name())
	// a report is for reading: the usual file mode, not CreateTemp's 0600
	if err := tmp.Chmod(0o644); err != nil {
		tmp.Close()
		return fmt.Errorf("--out %s: %w", path, err)
	}
	if err := render(tmp); err != nil {
		tmp.Close()
		return err
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("--out %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("--out %s: %w", path, err)
	}
	return nil
}
