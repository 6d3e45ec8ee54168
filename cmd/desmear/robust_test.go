package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// checkRefusal checks a refusal through the command: the exit status,
// one line on standard error prefixed "desmear:" holding want, no stack
// trace, nothing on standard output and no folder left at out.
func checkRefusal(t *testing.T, name string, code int, stdout, stderr string, wantCode int, want, out string) {
	t.Helper()
	line := strings.TrimSuffix(stderr, "\n")
	switch {
	case code != wantCode:
		t.Errorf("%s: exit %d, want %d (stderr %q)", name, code, wantCode, stderr)
	case !strings.Contains(line, want):
		t.Errorf("%s: stderr %q, want %q", name, stderr, want)
	case strings.Contains(line, "\n") || !strings.HasPrefix(line, "desmear: "):
		t.Errorf("%s: stderr is not one line prefixed \"desmear: \": %q", name, stderr)
	case strings.Contains(stderr, "goroutine "):
		t.Errorf("%s: a stack trace: %q", name, stderr)
	case stdout != "":
		t.Errorf("%s: stdout %q", name, stdout)
	}
	if out != "" {
		if _, err := os.Stat(out); err == nil {
			t.Errorf("%s: %s was left behind", name, out)
		}
	}
}

// A saved response whose files changed after it was written is refused,
// the message naming the file; a version 1 bundle is refused with the
// advice to build it again.
func TestSavedResponseIntegrity(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	src, _ := os.ReadFile(path)
	os.WriteFile(path, []byte(strings.Replace(string(src), "simulation:", "response: saved\nsimulation:", 1)), 0o644)
	if code, _, stderr := runCLI(t, context.Background(), "response", path); code != 0 {
		t.Fatalf("desmear response: exit %d, %s", code, stderr)
	}
	saved := filepath.Join(dir, "saved")
	files := map[string][]byte{}
	for _, name := range []string{"response.json", "migrations.dsm", "manifest.sha256"} {
		b, err := os.ReadFile(filepath.Join(saved, name))
		if err != nil {
			t.Fatal(err)
		}
		files[name] = b
	}
	for _, c := range []struct {
		name, file string
		change     func([]byte) []byte
		want       string
	}{
		{"an added digit", "response.json", func(b []byte) []byte {
			return []byte(strings.Replace(string(b), `"truth_bins": `, `"truth_bins": 9`, 1))
		}, "response.json: changed since the bundle was written"},
		{"a flipped byte", "migrations.dsm", func(b []byte) []byte { b[len(b)/2] ^= 1; return b }, "migrations.dsm: changed since the bundle was written"},
		{"no manifest", "manifest.sha256", nil, "manifest.sha256: missing"},
		{"version 1", "response.json", func(b []byte) []byte {
			return []byte(strings.Replace(string(b), `"format_version": 2`, `"format_version": 1`, 1))
		}, "format version 1, which carries no checksums and is no longer read; build the response again"},
	} {
		p := filepath.Join(saved, c.file)
		if c.change == nil {
			os.Remove(p)
		} else {
			b := c.change(append([]byte(nil), files[c.file]...))
			if string(b) == string(files[c.file]) {
				t.Fatalf("%s: no change made", c.name)
			}
			os.WriteFile(p, b, 0o644)
		}
		code, stdout, stderr := runCLI(t, context.Background(), "unfold", path)
		checkRefusal(t, c.name, code, stdout, stderr, exitInput, c.want, filepath.Join(dir, "result"))
		os.WriteFile(p, files[c.file], 0o644)
	}
	if code, _, stderr := runCLI(t, context.Background(), "unfold", path); code != 0 {
		t.Errorf("the restored bundle: exit %d, %s", code, stderr)
	}
}
