package result

import (
	"fmt"
	"io"
	"slices"
	"strings"

	"github.com/desmear/desmear/binning"
)

// Writer is the writer of one output format of a result folder (one or
// more files), registered by name (Register) and chosen by that name in
// the analysis file's output.formats and on the command line.
type Writer struct {
	// Name names the format ("json", "csv", ...).
	Name string
	// Default puts the format in DefaultFormats.
	Default bool
	// NeedsTruthBinning says that the format is written only when a
	// truth binning is given; Write leaves it out otherwise.
	NeedsTruthBinning bool
	// Write writes the format's files for r into f and returns their
	// names. truth is the truth binning, nil when none was given.
	Write func(f *Folder, r *Result, truth *binning.Scheme) ([]string, error)
}

// JSONFormat is the name of the format of result.json, which every
// result folder holds whatever formats are asked for.
const JSONFormat = "json"

var registry = map[string]Writer{}

// Register adds the format f. It panics if the name is empty or taken,
// or f has no Write: formats are registered by the files of this
// package, once, when the program starts.
func Register(f Writer) {
	if f.Name == "" || f.Write == nil {
		panic("result: Register of a format without a name or a writer")
	}
	if _, ok := registry[f.Name]; ok {
		panic("result: format " + f.Name + " registered twice")
	}
	registry[f.Name] = f
}

// Formats returns the names of the registered formats in the order Write
// writes them: json first, the others by name.
func Formats() []string {
	names := make([]string, 0, len(registry))
	for name := range registry {
		if name != JSONFormat {
			names = append(names, name)
		}
	}
	slices.Sort(names)
	return append([]string{JSONFormat}, names...)
}

// DefaultFormats returns the names of the formats written when none are
// chosen, in the order of Formats.
func DefaultFormats() []string {
	var names []string
	for _, name := range Formats() {
		if registry[name].Default {
			names = append(names, name)
		}
	}
	return names
}

// CheckFormats returns an error naming the first of names that is not a
// registered format, and the known ones.
func CheckFormats(names []string) error {
	for _, name := range names {
		if _, ok := registry[name]; !ok {
			return fmt.Errorf("unknown format %q (known: %s)", name, strings.Join(Formats(), ", "))
		}
	}
	return nil
}

// NeedsTruthBinning reports whether the format name is written only with
// a truth binning.
func NeedsTruthBinning(name string) bool { return registry[name].NeedsTruthBinning }

// Write writes r into the result folder f in the formats named: always
// result.json, then each other format named, in the order of Formats;
// formats that need a truth binning only when truth is not nil. It
// returns the names of the files written. It fails, writing nothing, if
// a number of r is NaN or infinite, or a name is not a known format.
func Write(f *Folder, r *Result, truth *binning.Scheme, formats []string) ([]string, error) {
	if err := CheckFormats(formats); err != nil {
		return nil, fmt.Errorf("result: %w", err)
	}
	if err := r.checkFinite(); err != nil {
		return nil, err
	}
	var files []string
	for _, name := range Formats() {
		format := registry[name]
		if name != JSONFormat && !slices.Contains(formats, name) || format.NeedsTruthBinning && truth == nil {
			continue
		}
		names, err := format.Write(f, r, truth)
		if err != nil {
			return nil, err
		}
		files = append(files, names...)
	}
	return files, nil
}

// writeFile creates the file name in f, lets write fill it and closes it.
func writeFile(f *Folder, name string, write func(w io.Writer) error) error {
	w, err := f.Create(name)
	if err != nil {
		return err
	}
	if err := write(w); err != nil {
		return err
	}
	return w.Close()
}
