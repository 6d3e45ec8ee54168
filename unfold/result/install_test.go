package result

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
	tmp, err := Temp(dir)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(filepath.Base(tmp), "."+filepath.Base(dir)+".partial-") || filepath.Dir(tmp) != filepath.Dir(dir) {
		t.Fatalf("Temp(%s) = %s, want a hidden .partial- sibling", dir, tmp)
	}
	if err := os.WriteFile(filepath.Join(tmp, name), []byte(content), 0o666); err != nil {
		t.Fatal(err)
	}
	return tmp
}

func testInstall(t *testing.T) {
	parent := filepath.Join(t.TempDir(), "missing", "parent")
	dir := filepath.Join(parent, "bundle")

	// A new folder: Temp creates the missing parent, Install renames.
	tmp := tempWith(t, dir, "a.txt", "one")
	if err := Install(tmp, dir, false); err != nil {
		t.Fatal(err)
	}
	if got, _ := os.ReadFile(filepath.Join(dir, "a.txt")); string(got) != "one" {
		t.Errorf("a.txt = %q after Install, want one", got)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
		t.Errorf("parent holds %v after Install, want only bundle", got)
	}

	// An existing folder is refused without replace and left as it was;
	// the temporary folder stays for the caller to remove.
	tmp = tempWith(t, dir, "b.txt", "two")
	if err := Install(tmp, dir, false); !errors.Is(err, ErrExists) {
		t.Errorf("Install onto an existing folder without replace: %v, want ErrExists", err)
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"a.txt"}) {
		t.Errorf("refused Install changed the folder: it holds %v", got)
	}
	if got := entries(t, tmp); !slices.Equal(got, []string{"b.txt"}) {
		t.Errorf("refused Install changed the temporary folder: it holds %v", got)
	}
	os.RemoveAll(tmp)
	if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
		t.Errorf("parent holds %v after a refused Install, want only bundle", got)
	}

	// With replace the old folder is replaced whole and nothing of it
	// is left beside the new one.
	tmp = tempWith(t, dir, "b.txt", "two")
	if err := Install(tmp, dir, true); err != nil {
		t.Fatal(err)
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"b.txt"}) {
		t.Errorf("replaced folder holds %v, want only b.txt", got)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
		t.Errorf("parent holds %v after replacing, want only bundle", got)
	}

	// A failing install (the temporary folder is gone) leaves the old
	// folder in place and nothing else behind.
	for _, replace := range []bool{false, true} {
		if err := Install(filepath.Join(parent, ".vanished"), dir, replace); err == nil {
			t.Errorf("Install(replace=%v) of a missing folder succeeded", replace)
		}
		if got := entries(t, dir); !slices.Equal(got, []string{"b.txt"}) {
			t.Errorf("failed Install(replace=%v) changed the folder: it holds %v", replace, got)
		}
		if got := entries(t, parent); !slices.Equal(got, []string{"bundle"}) {
			t.Errorf("parent holds %v after a failed Install(replace=%v), want only bundle", got, replace)
		}
	}
}

func TestWriteSynced(t *testing.T) {
	path := filepath.Join(t.TempDir(), "a.csv")
	long := strings.Repeat("x", 1<<17) // more than the buffer holds
	if err := WriteSynced(path, func(w io.Writer) error {
		_, err := io.WriteString(w, "head\n"+long)
		return err
	}); err != nil {
		t.Fatal(err)
	}
	if got, _ := os.ReadFile(path); string(got) != "head\n"+long {
		t.Errorf("file holds %d bytes, want %d", len(got), len("head\n"+long))
	}
	bad := errors.New("no more rows")
	if err := WriteSynced(path, func(io.Writer) error { return bad }); !errors.Is(err, bad) {
		t.Errorf("the writer's error came back as %v", err)
	}
	if err := WriteSynced(filepath.Join(path, "sub"), func(io.Writer) error { return nil }); err == nil {
		t.Error("a file below a file was created")
	}
}
