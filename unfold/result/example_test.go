package result_test

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/desmear/desmear/unfold/result"
)

// Write a result folder atomically: nothing appears at dir until Commit.
func ExampleFolder() {
	parent, _ := os.MkdirTemp("", "example")
	defer os.RemoveAll(parent)
	dir := filepath.Join(parent, "result")

	f, err := result.New(dir, false)
	if err != nil {
		fmt.Println(err)
		return
	}
	defer f.Abort() // removes the temporary folder unless committed
	if err := f.WriteJSON("summary.json", map[string]int{"bins": 3}); err != nil {
		fmt.Println(err)
		return
	}
	_, statErr := os.Stat(dir)
	fmt.Println("before Commit, exists:", statErr == nil)
	if err := f.Commit(); err != nil {
		fmt.Println(err)
		return
	}
	data, _ := os.ReadFile(filepath.Join(dir, "summary.json"))
	fmt.Print(string(data))
	// Output:
	// before Commit, exists: false
	// {
	//   "bins": 3
	// }
}

// Install a folder that is not a result folder (here a folder of plain
// tables): write its files into the folder Temp makes, then rename it
// into place. The caller decides itself whether an existing folder may
// be replaced.
func ExampleInstall() {
	parent, _ := os.MkdirTemp("", "example")
	defer os.RemoveAll(parent)
	dir := filepath.Join(parent, "tables")

	tmp, err := result.Temp(dir)
	if err != nil {
		fmt.Println(err)
		return
	}
	err = result.WriteSynced(filepath.Join(tmp, "generated.csv"), func(w io.Writer) error {
		_, err := io.WriteString(w, "truth,value\n0,1000\n")
		return err
	})
	if err == nil {
		err = result.Install(tmp, dir, false)
	}
	if err != nil {
		os.RemoveAll(tmp) // on failure the caller removes the temporary folder
		fmt.Println(err)
		return
	}
	data, _ := os.ReadFile(filepath.Join(dir, "generated.csv"))
	fmt.Print(string(data))
	entries, _ := os.ReadDir(parent)
	for _, e := range entries {
		fmt.Println("in the parent folder:", e.Name()) // no temporary folder is left
	}
	// Output:
	// truth,value
	// 0,1000
	// in the parent folder: tables
}
