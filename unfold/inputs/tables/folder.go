package tables

import (
	"fmt"
	"io"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// File names of a tables folder (WriteFolder). A folder holding
// ResponseFile counts as an earlier tables folder that may be replaced.
const (
	ResponseFile   = "response.csv"
	GeneratedFile  = "generated.csv"
	BackgroundFile = "background.csv"
)

// Folder is the content of a tables folder: the response, the generated
// counts and the expected background, with their sums of squared weights
// (variances for the background).
type Folder struct {
	Response                       *sparse.Matrix
	Generated, GeneratedSumW2      []float64
	Background, BackgroundVariance []float64
}

// CheckFolder reports whether a tables folder could be written at dir:
// nil when nothing exists there, or when replace is set and dir is an
// empty folder or an earlier tables folder (it holds a response.csv).
// Otherwise the error wraps the module's sentinel errors for an existing
// folder and for a folder of another kind (result.ErrExists,
// result.ErrNotResult).
func CheckFolder(dir string, replace bool) error {
	if err := atomicfile.Check(dir, ResponseFile, replace); err != nil {
		return fmt.Errorf("tables folder: %w", err)
	}
	return nil
}

// WriteFolder writes the tables of t into the folder dir atomically (a
// hidden temporary sibling folder renamed into place), refusing an
// existing dir as CheckFolder does; the check is made again just before
// the rename, so a folder that appeared meanwhile is not replaced.
func WriteFolder(dir string, t *Folder, replace bool) error {
	f, err := atomicfile.New(dir, ResponseFile, replace)
	if err != nil {
		return fmt.Errorf("tables folder: %w", err)
	}
	defer f.Abort()
	for _, file := range []struct {
		name  string
		write func(io.Writer) error
	}{
		{ResponseFile, func(w io.Writer) error { return WriteResponse(w, t.Response) }},
		{GeneratedFile, func(w io.Writer) error { return WriteVector(w, Generated, t.Generated, t.GeneratedSumW2) }},
		{BackgroundFile, func(w io.Writer) error { return WriteVector(w, Background, t.Background, t.BackgroundVariance) }},
	} {
		w, err := f.Create(file.name)
		if err != nil {
			return err
		}
		if err := file.write(w); err != nil {
			return err
		}
		if err := w.Close(); err != nil {
			return err
		}
	}
	if err := f.Commit(); err != nil {
		return fmt.Errorf("tables folder: %w", err)
	}
	return nil
}
