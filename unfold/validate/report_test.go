package validate

import (
	"context"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// TestValidateFolder: a validation writes its folder with the scan, the
// recommendation, the closure and the stress tests, refuses an existing
// folder without replace, and replaces an earlier one with it.
func TestValidateFolder(t *testing.T) {
	p, _ := band(t, 6)
	o := &Options{Method: iterations, Nominal: iterations(4), MaxK: 3, Toys: 60, Seed: 2,
		Weights: []NamedWeights{{"steeper", []float64{1.2, 1.1, 1, 0.9, 0.8, 0.7}}}}
	r, err := Validate(context.Background(), p, nil, o)
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "v")
	if err := WriteFolder(dir, false, Program{"test", "0"}, r); err != nil {
		t.Fatal(err)
	}
	var doc map[string]any
	b, err := os.ReadFile(filepath.Join(dir, JSONFile))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{"scan", "recommended_iterations", "recommendation", "closure", "stress"} {
		if _, ok := doc[key]; !ok {
			t.Errorf("validation.json has no %q", key)
		}
	}
	scan := doc["scan"].([]any)
	for _, key := range []string{"k", "bias", "variance", "pull_mean", "pull_width", "coverage", "mse"} {
		if _, ok := scan[0].(map[string]any)[key]; !ok {
			t.Errorf("scan entries have no %q", key)
		}
	}
	entries, _ := os.ReadDir(dir)
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	if want := Files(); !slices.Equal(names, slices.Sorted(slices.Values(want))) {
		t.Errorf("folder holds %v, want %v", names, want)
	}
	if err := WriteFolder(dir, false, Program{"test", "0"}, r); err == nil {
		t.Error("an existing folder was replaced without replace")
	}
	if err := WriteFolder(dir, true, Program{"test", "0"}, r); err != nil {
		t.Errorf("replacing an earlier validation folder: %v", err)
	}
	other := t.TempDir()
	os.WriteFile(filepath.Join(other, "notes.txt"), nil, 0o666)
	if err := CheckFolder(other, true); err == nil || !errors.Is(err, atomicfile.ErrNotOurs) {
		t.Errorf("a foreign folder: %v", err)
	}
}
