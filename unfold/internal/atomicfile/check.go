package atomicfile

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

// existsError is the type of ErrExists: it also matches fs.ErrExist.
type existsError struct{}

func (existsError) Error() string        { return "the folder exists" }
func (existsError) Is(target error) bool { return target == fs.ErrExist }

// ErrExists is wrapped by the errors of Check, New and Commit when the
// folder exists and replacing it was not asked for (or it appeared while
// the folder was written). errors.Is(err, fs.ErrExist) holds too.
var ErrExists error = existsError{}

// ErrNotOurs is wrapped by the errors of Check, New and Commit when
// replacing was asked for but the existing path is not an earlier folder
// of the kind being written: not a folder, or a folder that is neither
// empty nor holds the marker file. It keeps a mistyped output path from
// wiping an unrelated folder.
var ErrNotOurs = errors.New("not an earlier folder of this kind")

// Check reports whether a folder identified by the file marker may be
// written at path: nil when nothing exists there, or when replace is
// set and the path is an empty folder or a folder holding a regular file
// named marker, and everything in it can be removed. Otherwise it
// returns an error wrapping ErrExists or ErrNotOurs, or the error of
// looking at the path, or one wrapping fs.ErrPermission naming what in
// the earlier folder cannot be removed (a folder not writable, a file
// marked immutable). Commands call it
// before a long computation, so that a refused folder is reported at
// once; New and Commit check again.
func Check(path, marker string, replace bool) error {
	fi, err := os.Lstat(path)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	if !replace {
		return fmt.Errorf("%w: %s", ErrExists, path)
	}
	if !fi.IsDir() {
		return fmt.Errorf("%w: %s exists and is not a folder", ErrNotOurs, path)
	}
	entries, err := os.ReadDir(path)
	if err != nil {
		return err
	}
	if len(entries) == 0 {
		return nil
	}
	for _, e := range entries {
		if e.Name() == marker && e.Type().IsRegular() {
			return removable(path)
		}
	}
	return fmt.Errorf("%w: %s is a folder without a %s", ErrNotOurs, path, marker)
}

// removable checks that the folder path and everything in it could be
// removed: every folder in it writable and searchable, no file in it
// marked immutable or append-only. A replacement checks it before it
// starts, so that it never leaves an earlier folder half removed.
func removable(path string) error {
	err := filepath.WalkDir(path, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		return canRemoveIn(p, d.IsDir())
	})
	if err != nil {
		return fmt.Errorf("the earlier folder %s cannot be removed (%w); nothing was replaced: make it writable or choose another output folder", path, err)
	}
	return nil
}
