//go:build !linux

package atomicfile

import (
	"io/fs"
	"os"
)

// renameNoReplace renames the folder from to the path to, failing with
// an error satisfying errors.Is(err, fs.ErrExist) when to exists: a check
// followed by a rename, as this system offers no atomic no-replace
// rename through the standard library.
func renameNoReplace(from, to string) error { return renameCheck(from, to) }

// exchange reports false: no atomic exchange here; the caller falls back
// to two renames.
func exchange(a, b string) (bool, error) { return false, nil }

// canRemoveIn reports an error when the folder at path is not writable
// by its permission bits (this system offers no access check through the
// standard library).
func canRemoveIn(path string, dir bool) error {
	if !dir {
		return nil
	}
	fi, err := os.Stat(path)
	if err != nil {
		return err
	}
	if fi.Mode().Perm()&0o200 == 0 {
		return &os.PathError{Op: "remove", Path: path, Err: fs.ErrPermission}
	}
	return nil
}
