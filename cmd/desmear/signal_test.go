package main

import (
	"bufio"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"syscall"
	"testing"
	"time"
)

// buildDesmear builds the program into a temporary folder and returns
// the path of the binary. It skips the test when the go tool is absent.
func buildDesmear(t *testing.T) string {
	t.Helper()
	gotool, err := exec.LookPath("go")
	if err != nil {
		t.Skip("the go tool is not on PATH, so the desmear binary cannot be built for the signal test")
	}
	bin := filepath.Join(t.TempDir(), "desmear")
	cmd := exec.Command(gotool, "build", "-o", bin, ".")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// The real program, stopped by a real signal while it works: main turns
// the first SIGINT or SIGTERM into a cancelled context, and the demo
// must then stop, remove its hidden temporary sibling folder
// (".NAME.partial-*") and exit with status 130 and the "interrupted"
// message, leaving no output folder. This guards the wiring in main.go
// (signal.NotifyContext) and errors.go (exit 130 for a cancelled
// context) and the cleanup of demo.Generate, none of which the
// in-process tests with a cancelled context reach. The signal comes at
// two stages: while the events are generated (right after the first
// progress line) and while the input files are written (as soon as the
// hidden temporary folder appears).
func TestSignalLeavesNothing(t *testing.T) {
	if testing.Short() {
		t.Skip("builds the binary and runs it; skipped with -short")
	}
	bin := buildDesmear(t)
	for _, stage := range []string{"generating", "writing", "analysis"} {
		for _, sig := range []syscall.Signal{syscall.SIGINT, syscall.SIGTERM} {
			t.Run(stage+"/"+sig.String(), func(t *testing.T) {
				signalDemo(t, bin, stage, sig)
			})
		}
	}
}

func signalDemo(t *testing.T, bin, stage string, sig syscall.Signal) {
	parent := t.TempDir()
	out := filepath.Join(parent, "zeton")
	ctx, cancel := context.WithTimeout(context.Background(), 60*time.Second)
	defer cancel()
	// 2 million events take about a second to generate and write on 2
	// cores, far longer than the signal takes to arrive.
	cmd := exec.CommandContext(ctx, bin, "demo", "--out", out, "--events", "2000000")
	var stdout strings.Builder
	cmd.Stdout = &stdout
	errPipe, err := cmd.StderrPipe()
	if err != nil {
		t.Fatal(err)
	}
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	var (
		stderr  strings.Builder
		started = make(chan struct{}) // the first progress line was seen
		unfolds = make(chan struct{}) // the inputs are written, the analysis runs
		done    = make(chan struct{}) // stderr is closed
	)
	go func() {
		defer close(done)
		sc := bufio.NewScanner(errPipe)
		seen := false
		for sc.Scan() {
			line := sc.Text()
			stderr.WriteString(line + "\n")
			// The first progress line is printed just before the
			// generation starts: the command is at work.
			if !seen && strings.Contains(line, "generating") {
				seen = true
				close(started)
			}
			if strings.Contains(line, "inputs written") {
				close(unfolds)
			}
		}
	}()
	sent := false
	select {
	case <-started:
		if stage == "analysis" {
			// The inputs are complete and the analysis runs: the folder
			// of inputs must go too.
			select {
			case <-unfolds:
			case <-done:
				t.Fatalf("the program ended before its analysis started\nstderr:\n%s", stderr.String())
			}
		}
		if stage == "writing" {
			// Wait for the hidden temporary folder of the inputs.
			for !sent {
				matches, _ := filepath.Glob(filepath.Join(parent, ".zeton.partial-*"))
				if len(matches) > 0 {
					break
				}
				select {
				case <-done:
					sent = true // the program ended first; reported below
				case <-time.After(time.Millisecond):
				}
			}
			if sent {
				t.Fatalf("the program ended before its temporary folder appeared\nstderr:\n%s", stderr.String())
			}
		}
		if err := cmd.Process.Signal(sig); err != nil {
			t.Fatalf("sending %v: %v", sig, err)
		}
		sent = true
	case <-done:
	}
	<-done
	err = cmd.Wait()
	if ctx.Err() != nil {
		t.Fatalf("the program did not stop within 60 s of %v\nstderr:\n%s", sig, stderr.String())
	}
	if !sent {
		t.Fatalf("no progress line seen, no signal sent; exit %v\nstderr:\n%s", err, stderr.String())
	}
	if stage == "analysis" && cmd.ProcessState.ExitCode() == 0 {
		t.Skipf("the analysis finished before %v arrived", sig)
	}
	if stage != "analysis" && strings.Contains(stderr.String(), "inputs written") {
		t.Errorf("the inputs were complete before %v arrived; the test needs more events\nstderr:\n%s", sig, stderr.String())
	}
	if code := cmd.ProcessState.ExitCode(); code != exitInterrupted {
		t.Errorf("after %v: exit status %d (%v), want %d\nstderr:\n%s", sig, code, err, exitInterrupted, stderr.String())
	}
	if !strings.Contains(stderr.String(), "desmear: interrupted") {
		t.Errorf("after %v: stderr does not say interrupted:\n%s", sig, stderr.String())
	}
	if stdout.Len() != 0 {
		t.Errorf("after %v: stdout not empty: %q", sig, stdout.String())
	}
	entries, err := os.ReadDir(parent)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		t.Errorf("after %v: left behind beside the output folder: %s", sig, e.Name())
	}
}
