package eventfile

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// tempFiles lists the temporary files left in dir.
func tempFiles(dir string) []string {
	m, _ := filepath.Glob(filepath.Join(dir, ".*tmp-*"))
	return m
}

func TestWriteErrors(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "w.csv")
	for _, tc := range []struct {
		names []string
		cols  [][]float64
		want  string
	}{
		{[]string{"a"}, [][]float64{{1}, {2}}, "1 names for 2 columns"},
		{[]string{"a", "b"}, [][]float64{{1}, {2, 3}}, `column "b" has 2 values`},
		{[]string{"a", "a"}, [][]float64{{1}, {2}}, "given twice"},
		{[]string{"a,b"}, [][]float64{{1}}, "cannot be written to a CSV header"},
		{nil, nil, "no columns"},
		{[]string{"a", ""}, [][]float64{{1}, {2}}, "column 1 has an empty name"},
	} {
		if err := WriteCSV(p, tc.names, tc.cols); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%v: error %v, want %q", tc.names, err, tc.want)
		}
	}
	if _, err := os.Stat(p); !os.IsNotExist(err) {
		t.Errorf("failed writes left %s", p)
	}
	if err := WriteParquet(filepath.Join(dir, "no", "such", "dir.parquet"), []string{"a"}, [][]float64{{1}}); err == nil {
		t.Error("write into a missing folder succeeded")
	}
	if tmp := tempFiles(dir); len(tmp) > 0 {
		t.Errorf("temporary files left behind: %v", tmp)
	}
}

// TestWrittenFileMode checks that the writers' files are not private, as
// files written under os.CreateTemp's name would be (mode 0600): a sample
// written for others to read gets mode 0644, as os.WriteFile(..., 0o644)
// gives.
func TestWrittenFileMode(t *testing.T) {
	dir := t.TempDir()
	names, cols := []string{"a", "b"}, [][]float64{{1, 2, 3}, {4, 5, 6}}
	for name, write := range map[string]func(string) error{
		"m.csv":     func(p string) error { return WriteCSV(p, names, cols) },
		"m.parquet": func(p string) error { return WriteParquet(p, names, cols) },
		"m.root":    func(p string) error { return WriteROOT(p, "events", names, cols) },
	} {
		p := filepath.Join(dir, name)
		if err := write(p); err != nil {
			t.Fatal(err)
		}
		st, err := os.Stat(p)
		if err != nil {
			t.Fatal(err)
		}
		if st.Mode().Perm() != 0o644 {
			t.Errorf("%s: mode %v, want -rw-r--r--", name, st.Mode().Perm())
		}
	}
}
