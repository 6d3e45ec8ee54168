package main

import (
	"io"
	"os"

	"github.com/spf13/cobra"
	"golang.org/x/term"
)

// version is the program version, recorded in every result folder. It is
// set at build time with -ldflags "-X main.version=...".
var version = "0.1.0-dev"

// globalOptions are the options shared by every command.
type globalOptions struct {
	stdin      io.Reader
	stdout     io.Writer
	stderr     io.Writer
	noProgress bool
	quiet      bool
}

// progress reports whether a progress bar may be drawn: only when stderr
// is a terminal and the user did not switch it off.
func (g *globalOptions) progress() bool {
	if g.noProgress || g.quiet {
		return false
	}
	f, ok := g.stderr.(*os.File)
	return ok && term.IsTerminal(int(f.Fd()))
}

func newRootCommand(stdin io.Reader, stdout, stderr io.Writer) *cobra.Command {
	g := &globalOptions{stdin: stdin, stdout: stdout, stderr: stderr}
	root := &cobra.Command{
		Use:   "desmear",
		Short: "Multidimensional unfolding of detector-level spectra on sparse response matrices",
		Long: `desmear corrects measured, detector-level histograms of one to three
observables for resolution, acceptance and efficiency (unfolding), with the
D'Agostini iterative Bayesian method on a sparse response matrix. All axes
are unfolded at once through one global bin index; under- and overflow bins
are tracked separately.

Start with "desmear demo", which builds a fictional double-differential
measurement from simulated events and unfolds it.

` + exitCodesHelp,
		Version:       version,
		SilenceErrors: true,
		SilenceUsage:  true,
	}
	root.SetIn(stdin)
	root.SetOut(stdout)
	root.SetErr(stderr)
	root.SetFlagErrorFunc(func(c *cobra.Command, err error) error {
		return usagef("%v (see %q)", err, c.CommandPath()+" --help")
	})
	pf := root.PersistentFlags()
	pf.BoolVar(&g.noProgress, "no-progress", false, "never draw a progress bar (bars are drawn only when stderr is a terminal)")
	pf.BoolVarP(&g.quiet, "quiet", "q", false, "print only results and errors")

	root.AddCommand(
		newBinsCommand(g),
		newUnfoldCommand(g),
		newResponseCommand(g),
		newDemoCommand(g),
		newValidateCommand(g),
		newBenchCommand(g),
		newReportCommand(g),
		newBatchCommand(g),
	)
	root.SetHelpCommand(newHelpCommand(root))
	for _, c := range root.Commands() {
		withUsageHint(c)
	}
	return root
}

// withUsageHint makes an error of c's argument check (cobra's "accepts 1
// arg(s), received 0") say how the command is called, as flag errors do.
func withUsageHint(c *cobra.Command) {
	check := c.Args
	if check == nil {
		return
	}
	c.Args = func(cmd *cobra.Command, args []string) error {
		if err := check(cmd, args); err != nil {
			return usagef("%v; usage: %s (see %q)", err, cmd.UseLine(), cmd.CommandPath()+" --help")
		}
		return nil
	}
}
