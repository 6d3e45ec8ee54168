package result_test

import (
	"fmt"
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
	if err := result.WriteJSON(f, "summary.json", map[string]int{"bins": 3}); err != nil {
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
