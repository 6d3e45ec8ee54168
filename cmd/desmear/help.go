package main

import (
	"embed"
	"fmt"
	"io"
	"io/fs"
	"path"
	"sort"
	"strings"

	"github.com/spf13/cobra"
)

// helpPages are the reference pages, one Markdown file per topic. They
// live in the repository as cmd/desmear/help/TOPIC.md, where the README
// links to them, and are printed by "desmear help TOPIC".
//
//go:embed help/*.md
var helpPages embed.FS

// helpTopic is one reference page.
type helpTopic struct {
	name  string // the file name without .md
	title string // the page's first heading
}

// helpTopics lists the embedded pages in name order.
func helpTopics() []helpTopic {
	entries, err := fs.ReadDir(helpPages, "help")
	if err != nil {
		panic(err) // the pages are compiled in
	}
	var topics []helpTopic
	for _, e := range entries {
		name, ok := strings.CutSuffix(e.Name(), ".md")
		if !ok {
			continue
		}
		topics = append(topics, helpTopic{name: name, title: pageTitle(helpPage(name))})
	}
	sort.Slice(topics, func(i, j int) bool { return topics[i].name < topics[j].name })
	return topics
}

// helpPage returns the page of a topic, or nil if there is none.
func helpPage(topic string) []byte {
	if topic == "" || strings.ContainsAny(topic, `/\.`) {
		return nil
	}
	b, err := helpPages.ReadFile(path.Join("help", topic+".md"))
	if err != nil {
		return nil
	}
	return b
}

// pageTitle is the text of a page's first "# " heading.
func pageTitle(page []byte) string {
	for line := range strings.Lines(string(page)) {
		if t, ok := strings.CutPrefix(line, "# "); ok {
			return strings.TrimSpace(t)
		}
	}
	return ""
}

// newHelpCommand replaces cobra's help command: "desmear help TOPIC"
// prints a reference page, "desmear help COMMAND" the command's help, and
// "desmear help" the program's help followed by the list of topics.
func newHelpCommand(root *cobra.Command) *cobra.Command {
	return &cobra.Command{
		Use:   "help [TOPIC | COMMAND]",
		Short: "Print a reference page (analysis, binning, tables, results, method, ...) or a command's help",
		Long: `Print a reference page or the help of a command.

"desmear help" lists the topics; "desmear help TOPIC" prints the page of
TOPIC (Markdown) to standard output; "desmear help COMMAND" is the same
as "desmear COMMAND --help".`,
		Args: cobra.MaximumNArgs(1),
		ValidArgsFunction: func(*cobra.Command, []string, string) ([]string, cobra.ShellCompDirective) {
			var names []string
			for _, t := range helpTopics() {
				names = append(names, t.name)
			}
			for _, c := range root.Commands() {
				if c.IsAvailableCommand() {
					names = append(names, c.Name())
				}
			}
			return names, cobra.ShellCompDirectiveNoFileComp
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			out := cmd.OutOrStdout()
			if len(args) == 0 {
				if err := root.Help(); err != nil {
					return ioErr(err)
				}
				return writeTopicList(out)
			}
			if page := helpPage(args[0]); page != nil {
				if _, err := out.Write(page); err != nil {
					return ioErr(err)
				}
				return nil
			}
			if c, rest, err := root.Find(args); err == nil && c != root && len(rest) == 0 {
				c.InitDefaultHelpFlag() // as "desmear COMMAND --help" shows it
				c.InitDefaultVersionFlag()
				return c.Help()
			}
			return usagef("unknown help topic or command %q; topics: %s (see \"desmear help\")", args[0], topicNames())
		},
	}
}

// writeTopicList prints the topics with their titles.
func writeTopicList(w io.Writer) error {
	var b strings.Builder
	b.WriteString("\nReference pages (desmear help TOPIC):\n")
	for _, t := range helpTopics() {
		fmt.Fprintf(&b, "  %-12s %s\n", t.name, t.title)
	}
	if _, err := io.WriteString(w, b.String()); err != nil {
		return ioErr(err)
	}
	return nil
}

// topicNames is the comma-separated list of topics.
func topicNames() string {
	var names []string
	for _, t := range helpTopics() {
		names = append(names, t.name)
	}
	return strings.Join(names, ", ")
}
