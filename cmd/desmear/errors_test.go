package main

import (
	"context"
	"errors"
	"fmt"
	"io/fs"
	"testing"

	"github.com/desmear/desmear/unfold"
)

// exitCode is the one classifier: a class given where the error arose
// wins, typed errors map by kind, and an error of no known kind is an
// input error. cobra's own errors are usage errors (run classifies them
// before exitCode sees them).
func TestExitCode(t *testing.T) {
	ctx := context.Background()
	cancelled, cancel := context.WithCancel(ctx)
	cancel()
	for _, c := range []struct {
		name string
		ctx  context.Context
		err  error
		want int
	}{
		{"nil", ctx, nil, exitOK},
		{"untyped", ctx, errors.New("something"), exitInput},
		{"classified", ctx, ioErr(errors.New("disk")), exitIO},
		{"classified twice keeps the first", ctx, usageErr(ioErr(errors.New("disk"))), exitIO},
		{"too large", ctx, fmt.Errorf("wrapped: %w", &unfold.TooLargeError{}), exitNumerical},
		{"numerical", ctx, &unfold.NumericalError{}, exitNumerical},
		{"input", ctx, &unfold.InputError{Field: "Data"}, exitInput},
		{"setting", ctx, &unfold.SettingsError{Field: "Iterations"}, exitUsage},
		{"missing file", ctx, &fs.PathError{Op: "open", Path: "x", Err: fs.ErrNotExist}, exitInput},
		{"other path error", ctx, &fs.PathError{Op: "write", Path: "x", Err: errors.New("device")}, exitIO},
		{"cancelled", cancelled, errors.New("stopped"), exitInterrupted},
		{"context error", ctx, fmt.Errorf("run: %w", context.Canceled), exitInterrupted},
	} {
		if got := exitCode(c.ctx, c.err); got != c.want {
			t.Errorf("%s: exit %d, want %d", c.name, got, c.want)
		}
	}
	for _, args := range [][]string{{"nosuchcommand"}, {"unfold", "--nosuchflag"}, {"bins"}, {"bins", "a.yaml", "b.yaml"}} {
		if code, _, stderr := runCLI(t, ctx, args...); code != exitUsage {
			t.Errorf("%q: exit %d, want %d (usage)\n%s", args, code, exitUsage, stderr)
		}
	}
}
