package atomicfile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func TestInstall(t *testing.T) { bothWays(t, testInstall) }

// tempWith makes a temporary sibling of dir holding the file name with
// content.
func tempWith(t *testing.T, dir, name, content string) string {
	t.Helper()
	if err := os.MkdirAll(filepath.Dir(dir), 0o755); err != nil {
		t.Fatal(err)
	}
	tmp, err := os.MkdirTemp(filepath.Dir(dir), partialPattern(filepath.Base(dir)))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(tmp, name), []byte(content), 0o666); err != nil {
		t.Fatal(err)
	}
	return tmp
}

func testInstall(t *testing.T) {
	parent := filepath.Join(t.TempDir(), "missing", "parent")
	dir := filepath.Join(parent, "bundle")

	// A new folder: installDir renames.
	tmp := tempWith(t, dir, "a.txt", "one")
	if err := installDir(tmp, dir, false); err != nil {
		t.Fatal(err)
	}
	if got, _ := os.ReadFile(filepath.Join(dir, "a.txt")); string(got) != "one" {
		t.Errorf("a.txt = %q after installDir, want one", got)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
		t.Errorf("parent holds %v after installDir, want only bundle", got)
	}

	// An existing folder is refused without replace and left as it was;
	// the temporary folder stays for the caller to remove.
	tmp = tempWith(t, dir, "b.txt", "two")
	if err := installDir(tmp, dir, false); !errors.Is(err, ErrExists) {
		t.Errorf("installDir onto an existing folder without replace: %v, want ErrExists", err)
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"a.txt"}) {
		t.Errorf("refused installDir changed the folder: it holds %v", got)
	}
	if got := entries(t, tmp); !slices.Equal(got, []string{"b.txt"}) {
		t.Errorf("refused installDir changed the temporary folder: it holds %v", got)
	}
	os.RemoveAll(tmp)
	if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
		t.Errorf("parent holds %v after a refused installDir, want only bundle", got)
	}

	// With replace the old folder is replaced whole and nothing of it
	// is left beside the new one.
	tmp = tempWith(t, dir, "b.txt", "two")
	if err := installDir(tmp, dir, true); err != nil {
		t.Fatal(err)
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"b.txt"}) {
		t.Errorf("replaced folder holds %v, want only b.txt", got)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
		t.Errorf("parent holds %v after replacing, want only bundle", got)
	}

	// A failing installDir (the temporary folder is gone) leaves the old
	// folder in place and nothing else behind.
	for _, replace := range []bool{false, true} {
		if err := installDir(filepath.Join(parent, ".vanished"), dir, replace); err == nil {
			t.Errorf("installDir(replace=%v) of a missing folder succeeded", replace)
		}
		if got := entries(t, dir); !slices.Equal(got, []string{"b.txt"}) {
			t.Errorf("failed installDir(replace=%v) changed the folder: it holds %v", replace, got)
		}
		if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
			t.Errorf("parent holds %v after a failed installDir(replace=%v), want only bundle", got, replace)
		}
	}
}

// Write replaces the file whole, leaves nothing beside it, and on an
// error leaves the old content and no temporary file.
func TestWrite(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "a.csv")
	long := strings.Repeat("x", 1<<17) // more than the buffer holds
	for _, content := range []string{"old\n", "head\n" + long} {
		if err := Write(path, func(w io.Writer) error {
			_, err := io.WriteString(w, content)
			return err
		}); err != nil {
			t.Fatal(err)
		}
		if got, _ := os.ReadFile(path); string(got) != content {
			t.Errorf("file holds %d bytes, want %d", len(got), len(content))
		}
	}
	if fi, err := os.Stat(path); err != nil || fi.Mode().Perm() != 0o644 {
		t.Errorf("mode %v, %v; want 0644", fi.Mode(), err)
	}
	bad := errors.New("no more rows")
	if err := Write(path, func(w io.Writer) error { io.WriteString(w, "part"); return bad }); !errors.Is(err, bad) {
		t.Errorf("the writer's error came back as %v", err)
	}
	if got, _ := os.ReadFile(path); string(got) != "head\n"+long {
		t.Error("a failed Write changed the file")
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"a.csv"}) {
		t.Errorf("the folder holds %v, want only a.csv", got)
	}
	if err := Write(filepath.Join(path, "sub"), func(io.Writer) error { return nil }); err == nil {
		t.Error("a file below a file was created")
	}
	// WriteVia hands over a path with the target's extension.
	if err := WriteVia(filepath.Join(dir, "h.root"), func(tmp string) error {
		if filepath.Ext(tmp) != ".root" || filepath.Dir(tmp) != dir {
			t.Errorf("temporary path %s", tmp)
		}
		return os.WriteFile(tmp, []byte("root"), 0o600)
	}); err != nil {
		t.Fatal(err)
	}
	if got, _ := os.ReadFile(filepath.Join(dir, "h.root")); string(got) != "root" {
		t.Errorf("h.root holds %q", got)
	}
}
