package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"runtime/debug"
	"strings"

	"github.com/spf13/cobra"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/inputs/observable"
	"github.com/desmear/desmear/unfold/inputs/tables"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/result"
)

// Exit codes, one per class of failure. They are listed in the root
// command's help text; keep the two in step.
const (
	exitOK          = 0
	exitUsage       = 2  // bad command line: unknown command or flag, wrong arguments
	exitInput       = 3  // bad input: a file that cannot be parsed or makes no sense
	exitNumerical   = 4  // numerical failure: the problem cannot be solved as asked
	exitIO          = 5  // input/output failure: a file cannot be read or written
	exitBug         = 70 // an internal error (a panic): please report it
	exitInterrupted = 130
)

const exitCodesHelp = `Exit status:
  0    success
  2    usage error (unknown command or flag, wrong arguments or flag values)
  3    bad input (a file that cannot be parsed or is inconsistent, the message naming file, line and
       field; or an input file that is missing or not readable by you)
  4    numerical failure (the problem cannot be solved as asked, e.g. a covariance too large for memory)
  5    input/output failure (a file cannot be read or written for another reason)
  70   internal error (a bug: please report it with the message)
  130  interrupted (SIGINT or SIGTERM); no partial output is left behind`

// classError attaches an exit class to an error.
type classError struct {
	code int
	err  error
}

func (e *classError) Error() string { return e.err.Error() }
func (e *classError) Unwrap() error { return e.err }

func withClass(code int, err error) error {
	if err == nil {
		return nil
	}
	var ce *classError
	if errors.As(err, &ce) {
		return err
	}
	return &classError{code: code, err: err}
}

// usageErr, inputErr, numericalErr and ioErr classify an error for the exit code.
func usageErr(err error) error     { return withClass(exitUsage, err) }
func inputErr(err error) error     { return withClass(exitInput, err) }
func numericalErr(err error) error { return withClass(exitNumerical, err) }
func ioErr(err error) error        { return withClass(exitIO, err) }

func usagef(format string, a ...any) error { return usageErr(fmt.Errorf(format, a...)) }

// exitCode maps an error to the process exit status. It is the one
// classifier of errors: an error classified where it arose (usageErr,
// inputErr, numericalErr, ioErr) keeps its class, the libraries' typed
// errors map by kind, and an error of no known kind is an input error
// (exit 3): the commands' failures that carry no type come from reading
// their input files. (run classifies cobra's own errors, which arise
// before a command runs, as usage errors first.)
func exitCode(ctx context.Context, err error) int {
	var (
		ce  *classError
		ae  *analysis.Error
		aes analysis.Errors
		be  *binning.Error
		te  *tables.Error
		oe  *observable.Error
		ie  *unfold.InputError
		se  *unfold.SettingsError
		tl  *unfold.TooLargeError
		ne  *unfold.NumericalError
		ee  *response.EventError
		we  *analysis.OutputError
		pe  *fs.PathError
	)
	switch {
	case err == nil:
		return exitOK
	case errors.Is(err, context.Canceled), ctx.Err() != nil:
		return exitInterrupted
	case errors.As(err, &ce):
		return ce.code
	case errors.As(err, &tl), errors.As(err, &ne):
		return exitNumerical
	case errors.As(err, &we):
		return exitIO
	case errors.Is(err, fs.ErrNotExist), errors.Is(err, fs.ErrPermission):
		return exitInput // a missing or unreadable input file
	case errors.As(err, &ae), errors.As(err, &aes), errors.As(err, &be), errors.As(err, &te), errors.As(err, &oe),
		errors.As(err, &ie), errors.As(err, &ee):
		return exitInput
	case errors.As(err, &se), errors.Is(err, result.ErrExists), errors.Is(err, result.ErrNotResult):
		return exitUsage // a setting or an output folder the user chose
	case errors.As(err, &pe):
		return exitIO
	}
	return exitInput
}

// run executes the command line and returns the exit status. It is the
// program's single error path: every error is printed once, here.
func run(ctx context.Context, args []string, stdin io.Reader, stdout, stderr io.Writer) (code int) {
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(stderr, "desmear: internal error: %v\n%s\nThis is a bug in desmear; please report it with the message above and the command you ran.\n", r, debug.Stack())
			code = exitBug
		}
	}()
	root := newRootCommand(stdin, stdout, stderr)
	started := false
	root.PersistentPreRun = func(*cobra.Command, []string) { started = true }
	root.SetArgs(args)
	err := root.ExecuteContext(ctx)
	if err != nil && !started {
		// cobra's own errors: an unknown command or flag, a flag value
		// it cannot parse, the wrong number of arguments.
		err = usageErr(err)
	}
	code = exitCode(ctx, err)
	if err != nil {
		if code == exitInterrupted {
			fmt.Fprintln(stderr, "desmear: interrupted; no output was written")
		} else {
			// One line per error (a file with several problems lists
			// each), every line prefixed.
			msg := strings.TrimRight(err.Error(), "\n")
			fmt.Fprintf(stderr, "desmear: %s\n", strings.ReplaceAll(msg, "\n", "\ndesmear: "))
		}
	}
	return code
}
