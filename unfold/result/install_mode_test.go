package result

import (
	"os"
	"path/filepath"
	"testing"
)

// A folder made by Temp and installed is not private: it has the mode of
// a result folder (0755), unlike os.MkdirTemp's 0700.
func TestTempFolderMode(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "bundle")
	tmp, err := Temp(dir)
	if err != nil {
		t.Fatal(err)
	}
	if err := Install(tmp, dir, false); err != nil {
		t.Fatal(err)
	}
	fi, err := os.Stat(dir)
	if err != nil {
		t.Fatal(err)
	}
	if fi.Mode().Perm() != 0o755 {
		t.Errorf("installed folder mode %v, want 0755", fi.Mode().Perm())
	}
}
