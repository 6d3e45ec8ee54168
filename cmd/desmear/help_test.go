package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// The topics the README links to; each must have its page.
var requiredTopics = []string{"analysis", "binning", "expressions", "method", "results", "scenario", "tables"}

func TestHelpTopicPrintsEmbeddedPage(t *testing.T) {
	topics := helpTopics()
	have := map[string]bool{}
	for _, tp := range topics {
		have[tp.name] = true
	}
	for _, name := range requiredTopics {
		if !have[name] {
			t.Errorf("no help page %s.md", name)
		}
	}
	for _, tp := range topics {
		want, err := os.ReadFile(filepath.Join("help", tp.name+".md"))
		if err != nil {
			t.Fatal(err)
		}
		code, stdout, stderr := runCLI(t, context.Background(), "help", tp.name)
		if code != exitOK || stderr != "" {
			t.Errorf("help %s: exit %d, stderr %q", tp.name, code, stderr)
		}
		if stdout != string(want) {
			t.Errorf("help %s does not print help/%s.md exactly (%d bytes printed, %d in the file)", tp.name, tp.name, len(stdout), len(want))
		}
		if tp.title == "" {
			t.Errorf("help/%s.md has no '# ' title", tp.name)
		}
	}
}

func TestHelpListsTopicsAndCommands(t *testing.T) {
	code, stdout, stderr := runCLI(t, context.Background(), "help")
	if code != exitOK || stderr != "" {
		t.Fatalf("exit %d, stderr %q", code, stderr)
	}
	for _, tp := range helpTopics() {
		if !strings.Contains(stdout, "\n  "+tp.name+" ") || !strings.Contains(stdout, tp.title) {
			t.Errorf("desmear help does not list topic %s (%s):\n%s", tp.name, tp.title, stdout)
		}
	}
	for _, c := range []string{"bins", "demo", "response", "unfold"} {
		if !strings.Contains(stdout, "\n  "+c+" ") {
			t.Errorf("desmear help does not list command %s:\n%s", c, stdout)
		}
	}
}

func TestHelpCommandIsCommandHelp(t *testing.T) {
	for _, c := range []string{"unfold", "bins", "response", "demo"} {
		_, viaHelp, _ := runCLI(t, context.Background(), "help", c)
		code, viaFlag, _ := runCLI(t, context.Background(), c, "--help")
		if code != exitOK || viaHelp != viaFlag || viaHelp == "" {
			t.Errorf("desmear help %s differs from desmear %s --help (exit %d)", c, c, code)
		}
	}
}

func TestHelpUnknownTopicIsUsageError(t *testing.T) {
	for _, args := range [][]string{{"help", "nonsense"}, {"help", "../help/method"}, {"help", "method.md"}, {"help", "method", "extra"}} {
		code, stdout, stderr := runCLI(t, context.Background(), args...)
		if code != exitUsage {
			t.Errorf("%v: exit %d, want %d", args, code, exitUsage)
		}
		if stdout != "" || !strings.HasPrefix(stderr, "desmear: ") {
			t.Errorf("%v: stdout %q, stderr %q", args, stdout, stderr)
		}
	}
}

// A topic named like a command would hide that command's help.
func TestHelpTopicsAreNotCommandNames(t *testing.T) {
	root := newRootCommand(strings.NewReader(""), new(strings.Builder), new(strings.Builder))
	for _, tp := range helpTopics() {
		for _, c := range root.Commands() {
			if c.Name() == tp.name || c.HasAlias(tp.name) {
				t.Errorf("help topic %q is also a command", tp.name)
			}
		}
		if tp.name == "help" || tp.name == "completion" {
			t.Errorf("help topic %q is also a command", tp.name)
		}
	}
}
