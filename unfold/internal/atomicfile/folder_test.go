package atomicfile

import (
	"errors"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// marker is the file naming an earlier folder in these tests.
const marker = "result.json"

// entries lists the names in dir, hidden ones included.
func entries(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range es {
		names = append(names, e.Name())
	}
	return names
}

func TestCommit(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "run")
	f, err := New(dir, marker, false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	if err := f.WriteFile("a.txt", []byte("alpha\n")); err != nil {
		t.Fatal(err)
	}
	w, err := f.Create("tables/region0.csv")
	if err != nil {
		t.Fatal(err)
	}
	w.WriteString("x\n") // left open: Commit closes it
	p, err := f.Reserve("hist/h.bin")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, []byte{1, 2, 3}, 0o666); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(dir); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("final folder exists before Commit: %v", err)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"run"}) {
		t.Errorf("parent holds %v, want only run", got)
	}
	for name, want := range map[string]string{"a.txt": "alpha\n", "tables/region0.csv": "x\n", "hist/h.bin": "\x01\x02\x03"} {
		got, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil || string(got) != want {
			t.Errorf("%s = %q, %v; want %q", name, got, err, want)
		}
	}
	fi, err := os.Stat(dir)
	if err != nil || fi.Mode().Perm() != 0o755 {
		t.Errorf("folder mode %v, %v; want 0755", fi.Mode(), err)
	}
	if err := f.Abort(); err != nil {
		t.Errorf("Abort after Commit: %v", err)
	}
	if _, err := os.Stat(dir); err != nil {
		t.Errorf("Abort after Commit removed the result: %v", err)
	}
	if err := f.WriteFile("late.txt", nil); err == nil {
		t.Error("WriteFile after Commit succeeded")
	}
}

func TestAbortLeavesNothing(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "new", "deeper", "run")
	f, err := New(dir, marker, false)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.WriteFile("result.json", []byte(`{"a": 1}`)); err != nil {
		t.Fatal(err)
	}
	w, _ := f.Create("open.csv")
	w.WriteString("partial")
	if err := f.Abort(); err != nil {
		t.Fatal(err)
	}
	if got := entries(t, parent); len(got) != 0 {
		t.Errorf("after Abort the parent holds %v, want nothing (created parents removed too)", got)
	}
	if err := f.Commit(); err == nil {
		t.Error("Commit after Abort succeeded")
	}
}

func TestExisting(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "run")
	if err := os.Mkdir(dir, 0o777); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("mine"), 0o666); err != nil {
		t.Fatal(err)
	}
	if _, err := New(dir, marker, false); !errors.Is(err, ErrExists) || !errors.Is(err, fs.ErrExist) {
		t.Errorf("New on an existing folder: %v, want ErrExists (and fs.ErrExist)", err)
	}
	// Not an earlier folder of this kind: refused even with replace.
	if _, err := New(dir, marker, true); !errors.Is(err, ErrNotOurs) {
		t.Errorf("New(replace) on a foreign folder: %v, want ErrNotOurs", err)
	}
	file := filepath.Join(parent, "file")
	os.WriteFile(file, nil, 0o666)
	if err := Check(file, marker, true); !errors.Is(err, ErrNotOurs) {
		t.Errorf("Check(replace) on a file: %v, want ErrNotOurs", err)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"file", "run"}) {
		t.Errorf("refusals left %v", got)
	}

	// A folder appearing while the result is written is not overwritten.
	late := filepath.Join(parent, "late")
	f, err := New(late, marker, false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	f.WriteFile("result.json", []byte("{}"))
	os.Mkdir(late, 0o777)
	if err := f.Commit(); !errors.Is(err, ErrExists) {
		t.Errorf("Commit onto a folder created meanwhile: %v, want ErrExists", err)
	}
	f.Abort()
	if got := entries(t, late); len(got) != 0 {
		t.Errorf("the folder created meanwhile now holds %v", got)
	}
}

func TestReplace(t *testing.T) { bothWays(t, testReplace) }

// bothWays runs test with the atomic exchange of folders and again with
// the fallback (rename aside) used where the system has none.
func bothWays(t *testing.T, test func(*testing.T)) {
	t.Run("exchange", test)
	t.Run("fallback", func(t *testing.T) {
		noExchange = true
		defer func() { noExchange = false }()
		test(t)
	})
}

func testReplace(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "run")
	for k, content := range []string{`{"n":1}`, `{"n":2}`} {
		f, err := New(dir, marker, k > 0)
		if err != nil {
			t.Fatal(err)
		}
		if k == 0 {
			f.WriteFile("old-only.txt", nil)
		}
		f.WriteFile(marker, []byte(content))
		if err := f.Commit(); err != nil {
			t.Fatal(err)
		}
	}
	got, _ := os.ReadFile(filepath.Join(dir, marker))
	if string(got) != `{"n":2}` {
		t.Errorf("result.json = %s after replacing", got)
	}
	if _, err := os.Stat(filepath.Join(dir, "old-only.txt")); !errors.Is(err, os.ErrNotExist) {
		t.Error("a file of the replaced result survived")
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"run"}) {
		t.Errorf("parent holds %v after replacing, want only run", got)
	}
	// An empty folder may be replaced too.
	empty := filepath.Join(parent, "empty")
	os.Mkdir(empty, 0o777)
	if err := Check(empty, marker, true); err != nil {
		t.Errorf("Check(replace) on an empty folder: %v", err)
	}
}

func TestNames(t *testing.T) {
	f, err := New(filepath.Join(t.TempDir(), "run"), marker, false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	for _, bad := range []string{"", ".", "../x", "/abs", "a/../b", `a\b`} {
		if _, err := f.Create(bad); err == nil {
			t.Errorf("Create(%q) succeeded", bad)
		}
	}
	if _, err := f.Create("a/b.csv"); err != nil {
		t.Fatal(err)
	}
	for _, clash := range []string{"a/b.csv", "a", "a/b.csv/c"} {
		if _, err := f.Create(clash); err == nil {
			t.Errorf("Create(%q) after a/b.csv succeeded", clash)
		}
	}
	p, _ := f.Reserve("never.root")
	_ = p
	if err := f.Commit(); err == nil || !strings.Contains(err.Error(), "reserved but not written") {
		t.Errorf("Commit with a reserved file missing: %v", err)
	}
	if _, err := New(".", marker, false); err == nil {
		t.Error(`New(".") succeeded`)
	}
}

// An earlier folder that cannot be removed whole (a file marked
// immutable, or a folder without write permission) is refused before
// anything is written, and left exactly as it was: replacing it would
// otherwise install the new folder and leave the old one behind as a
// hidden partial (common practice: unlink needs write permission on the
// folder; an immutable file cannot be unlinked even by root).
func TestReplaceRefusesUnremovable(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	if err := os.MkdirAll(filepath.Join(dir, "sub"), 0o755); err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(dir, "marker"), []byte("old"), 0o644)
	stuck := filepath.Join(dir, "sub", "stuck")
	os.WriteFile(stuck, []byte("old"), 0o644)
	if os.Geteuid() == 0 {
		if out, err := exec.Command("chattr", "+i", stuck).CombinedOutput(); err != nil {
			t.Skipf("running as root and chattr +i is not available here (%v: %s)", err, out)
		}
		t.Cleanup(func() { exec.Command("chattr", "-i", stuck).Run() })
	} else {
		os.Chmod(filepath.Join(dir, "sub"), 0o555)
		t.Cleanup(func() { os.Chmod(filepath.Join(dir, "sub"), 0o755) })
	}
	if err := Check(dir, "marker", true); !errors.Is(err, fs.ErrPermission) || !strings.Contains(err.Error(), "cannot be removed") {
		t.Errorf("Check of an unremovable earlier folder: %v, want a permission error saying it cannot be removed", err)
	}
	f, err := New(dir, "marker", true)
	if err == nil {
		f.Abort()
		t.Fatal("New over an unremovable earlier folder succeeded")
	}
	if got := entries(t, dir); !slices.Equal(got, []string{"marker", "sub"}) {
		t.Errorf("the earlier folder holds %v after the refusal", got)
	}
	if got := entries(t, filepath.Dir(dir)); !slices.Equal(got, []string{"out"}) {
		t.Errorf("the parent holds %v after the refusal, want only out", got)
	}
}
