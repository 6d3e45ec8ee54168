package result

import (
	"fmt"

	"github.com/desmear/desmear/binning"
)

// JSONFile is the name of the result document in a result folder; a
// folder holding it counts as an earlier result that may be replaced.
const JSONFile = "result.json"

func init() {
	Register(Writer{Name: JSONFormat, Default: true, Write: writeJSONFormat})
}

// writeJSONFormat writes result.json.
func writeJSONFormat(f *Folder, r *Result, _ *binning.Scheme) ([]string, error) {
	if err := WriteJSON(f, JSONFile, r); err != nil {
		return nil, err
	}
	return []string{JSONFile}, nil
}

// WriteJSON writes v as JSON to the file name of folder f: objects one
// member per line, indented by two spaces, and arrays of plain values
// (numbers, strings, booleans) on one line each. It fails, writing
// nothing, if v holds a NaN or an infinity, which JSON cannot represent.
func WriteJSON(f *Folder, name string, v any) error {
	data, err := marshal(v)
	if err != nil {
		return fmt.Errorf("result: %s: %w", name, err)
	}
	return f.WriteFile(name, data)
}
