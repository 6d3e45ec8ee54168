package main

import (
	"bytes"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// repoRoot is the module root, seen from this package's folder.
const repoRoot = "../.."

// docPages are the documentation files whose links are checked.
func docPages(t *testing.T) []string {
	t.Helper()
	pages := []string{"README.md", "DEVELOPERS.md"}
	help, err := filepath.Glob(filepath.Join(repoRoot, "cmd/desmear/help/*.md"))
	if err != nil {
		t.Fatal(err)
	}
	for _, h := range help {
		rel, _ := filepath.Rel(repoRoot, h)
		pages = append(pages, filepath.ToSlash(rel))
	}
	return pages
}

func readRepoFile(t *testing.T, rel string) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(repoRoot, filepath.FromSlash(rel)))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

func existsInRepo(rel string) bool {
	_, err := os.Stat(filepath.Join(repoRoot, filepath.FromSlash(rel)))
	return err == nil
}

var markdownLink = regexp.MustCompile(`\]\(([^)\s]+)\)`)

// Every relative link of the README, DEVELOPERS.md and the help pages
// points to a file of the repository.
func TestDocsRelativeLinksExist(t *testing.T) {
	for _, page := range docPages(t) {
		for _, m := range markdownLink.FindAllStringSubmatch(string(readRepoFile(t, page)), -1) {
			target := m[1]
			if strings.Contains(target, "://") || strings.HasPrefix(target, "mailto:") || strings.HasPrefix(target, "#") {
				continue
			}
			target, _, _ = strings.Cut(target, "#")
			rel := filepath.ToSlash(filepath.Join(filepath.Dir(page), target))
			if strings.HasPrefix(rel, "../") || !existsInRepo(rel) {
				t.Errorf("%s: link %q points to %s, which is not in the repository", page, m[1], rel)
			}
		}
	}
}

func TestDocsLengths(t *testing.T) {
	for _, c := range []struct {
		page string
		max  int
	}{{"README.md", 420}, {"DEVELOPERS.md", 260}} {
		if n := bytes.Count(readRepoFile(t, c.page), []byte("\n")); n > c.max {
			t.Errorf("%s has %d lines, at most %d: move reference text into cmd/desmear/help/", c.page, n, c.max)
		}
	}
}

// The README's test command is the one CI runs.
func TestDocsREADMETestCommandIsCI(t *testing.T) {
	ci := string(readRepoFile(t, ".ci/run"))
	readme := string(readRepoFile(t, "README.md"))
	if !strings.Contains(ci, "\ngo test ./...\n") {
		t.Fatalf(".ci/run does not run \"go test ./...\"")
	}
	if !strings.Contains(readme, "\ngo test ./...   ") {
		t.Errorf("the README's set-up block does not give CI's test command \"go test ./...\"")
	}
}

// The complete example of the analysis page is the file the analysis
// tests decode, byte for byte.
func TestDocsAnalysisExampleIsTested(t *testing.T) {
	const file = "unfold/analysis/testdata/reference/analysis.yaml"
	want := string(readRepoFile(t, file))
	page := string(readRepoFile(t, "cmd/desmear/help/analysis.md"))
	_, rest, ok := strings.Cut(page, "## A complete example")
	if !ok {
		t.Fatal("analysis.md has no section \"## A complete example\"")
	}
	_, rest, ok = strings.Cut(rest, "```yaml\n")
	if !ok {
		t.Fatal("analysis.md: no yaml block in \"A complete example\"")
	}
	got, _, _ := strings.Cut(rest, "```\n")
	if got != want {
		t.Errorf("the complete example in analysis.md differs from %s; keep them byte-identical", file)
	}
}

// methodSections maps "N" to the title of "## §N Title" in method.md.
func methodSections(t *testing.T) map[string]string {
	t.Helper()
	secs := map[string]string{}
	re := regexp.MustCompile(`(?m)^## §(\d+) (.+)$`)
	for _, m := range re.FindAllStringSubmatch(string(readRepoFile(t, "cmd/desmear/help/method.md")), -1) {
		if _, dup := secs[m[1]]; dup {
			t.Errorf("method.md has two sections §%s", m[1])
		}
		secs[m[1]] = strings.TrimSpace(m[2])
	}
	return secs
}

// commentText is the text of a Go file's comments, line breaks and
// comment markers folded into single spaces, so that a citation wrapped
// over two comment lines reads as one.
func commentText(src []byte) string {
	var b strings.Builder
	for line := range strings.Lines(string(src)) {
		line = strings.TrimSpace(line)
		if _, c, ok := strings.Cut(line, "//"); ok {
			b.WriteString(strings.TrimSpace(c))
			b.WriteByte(' ')
		}
	}
	return b.String()
}

var (
	methodCite = regexp.MustCompile(`method\.md §(\d+)`)
	pageCite   = regexp.MustCompile(`[\w./-]*\b[\w-]+\.md\b`)
	outsideRef = regexp.MustCompile(`(?i)\bmethods? notes\b|\bmethods\.md\b`)
)

// Every documentation page a test comment names exists, every cited
// section of method.md exists, and a cited title is the section's title.
// No test cites notes that are not in the repository.
func TestDocsCitationsInTests(t *testing.T) {
	secs := methodSections(t)
	if len(secs) == 0 {
		t.Fatal("method.md has no \"## §N Title\" sections")
	}
	err := filepath.WalkDir(repoRoot, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if d.IsDir() && strings.HasPrefix(d.Name(), ".") && path != repoRoot {
			return filepath.SkipDir
		}
		if d.IsDir() || !strings.HasSuffix(path, "_test.go") {
			return nil
		}
		src, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(repoRoot, path)
		text := commentText(src)
		if m := outsideRef.FindString(text); m != "" {
			t.Errorf("%s cites %q, which is not in the repository: cite cmd/desmear/help/method.md by section, or the paper", rel, m)
		}
		for _, loc := range methodCite.FindAllStringSubmatchIndex(text, -1) {
			num := text[loc[2]:loc[3]]
			title, ok := secs[num]
			if !ok {
				t.Errorf("%s cites method.md §%s, which does not exist", rel, num)
				continue
			}
			if cited := citedTitle(text[loc[1]:]); cited != "" && !strings.HasPrefix(cited, title) && !strings.HasPrefix(title, cited) {
				t.Errorf("%s cites \"method.md §%s %s\", but §%s is titled %q", rel, num, cited, num, title)
			}
		}
		for _, name := range pageCite.FindAllString(text, -1) {
			if !docExists(filepath.Dir(rel), name) {
				t.Errorf("%s names the page %s, which does not exist", rel, name)
			}
		}
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
}

// citedTitle is the title following a citation "method.md §N": the
// words after it when the first starts with a capital letter, up to the
// next punctuation.
func citedTitle(after string) string {
	rest, ok := strings.CutPrefix(after, " ")
	if !ok || rest == "" || rest[0] < 'A' || rest[0] > 'Z' {
		return ""
	}
	if i := strings.IndexAny(rest, ".,;:()"); i >= 0 {
		rest = rest[:i]
	}
	return strings.TrimSpace(rest)
}

// docExists reports whether a page named in a test comment of folder dir
// exists: a path from the repository root or from dir, or a bare name of
// a help page, a top-level page or a page of dir.
func docExists(dir, name string) bool {
	if outsideRef.MatchString(name) {
		return true // reported on its own
	}
	if strings.Contains(name, "/") {
		return existsInRepo(name) || existsInRepo(filepath.ToSlash(filepath.Join(dir, name)))
	}
	return existsInRepo("cmd/desmear/help/"+name) || existsInRepo(name) || existsInRepo(filepath.ToSlash(filepath.Join(dir, name)))
}

var backquoted = regexp.MustCompile("`([^`\\s]+)`")

// Every file a recipe of DEVELOPERS.md names exists. A path with the
// placeholder NAME needs the folder it goes into.
func TestDocsRecipePathsExist(t *testing.T) {
	dev := string(readRepoFile(t, "DEVELOPERS.md"))
	_, recipes, ok := strings.Cut(dev, "\n## Recipes\n")
	if !ok {
		t.Fatal("DEVELOPERS.md has no \"## Recipes\" section")
	}
	if next := strings.Index(recipes, "\n## "); next >= 0 {
		recipes = recipes[:next]
	}
	n := 0
	for _, m := range backquoted.FindAllStringSubmatch(recipes, -1) {
		p := m[1]
		if !strings.Contains(p, "/") || strings.Contains(p, "://") {
			continue // not a path
		}
		n++
		if i := strings.Index(p, "NAME"); i >= 0 {
			p = p[:strings.LastIndex(p[:i], "/")+1]
		}
		if !existsInRepo(strings.TrimSuffix(p, "/")) {
			t.Errorf("DEVELOPERS.md recipes name %s, which is not in the repository", m[1])
		}
	}
	if n == 0 {
		t.Error("DEVELOPERS.md recipes name no files")
	}
}
