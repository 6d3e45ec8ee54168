package atomicfile

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

// partialPattern is the os.MkdirTemp pattern of the temporary sibling
// folder of the folder named base: ".NAME.partial-XXXX".
func partialPattern(base string) string { return "." + base + ".partial-" }

// noExchange makes installDir take the fallback path (for tests).
var noExchange = false

// installDir puts the completed folder tmp at the path dir by renaming
// it, so that dir holds either what it held before or all of tmp, never
// a part of it. tmp must be on the same filesystem as dir; a sibling is.
// Files in tmp should already be synced to disk; installDir makes the
// rename itself durable by syncing dir's parent.
//
// With replace false an existing dir is refused with an error wrapping
// ErrExists, also when it appears while installDir runs: on Linux the
// rename is one renameat2(RENAME_NOREPLACE), elsewhere and on
// filesystems without it a check precedes the rename. With replace true
// an existing dir is replaced whatever it holds, and its old content is
// removed; on Linux the two are exchanged in one atomic step (renameat2
// RENAME_EXCHANGE), elsewhere the old one is first renamed aside (to a
// hidden ".NAME.old-XXXX" sibling) and put back if the second rename
// fails. installDir does not look inside an existing dir: Check decides,
// before, whether it may be replaced.
//
// On error nothing is installed, dir is left as it was and tmp is left
// for the caller to remove.
func installDir(tmp, dir string, replace bool) error {
	dir = filepath.Clean(dir)
	if err := place(tmp, dir, replace); err != nil {
		return err
	}
	// The folder is in place; a failing sync of the parent is not worth
	// failing for.
	_ = syncPath(filepath.Dir(dir), true)
	return nil
}

func place(tmp, dir string, replace bool) error {
	if _, err := os.Lstat(dir); err == nil && replace {
		ok, err := false, error(nil)
		if !noExchange {
			ok, err = exchange(tmp, dir)
		}
		if err != nil {
			return err
		}
		if ok {
			// The old folder now sits at the temporary path.
			return removeOld(dir, tmp)
		}
		// Fallback: move the old folder aside, then put the new one in.
		aside, err := os.MkdirTemp(filepath.Dir(dir), "."+filepath.Base(dir)+".old-")
		if err != nil {
			return err
		}
		if err := os.Remove(aside); err != nil {
			return err
		}
		if err := os.Rename(dir, aside); err != nil {
			return err
		}
		if err := renameNoReplace(tmp, dir); err != nil {
			_ = os.Rename(aside, dir)
			return err
		}
		return removeOld(dir, aside)
	}
	err := renameNoReplace(tmp, dir)
	if errors.Is(err, fs.ErrExist) {
		return fmt.Errorf("%w: %s", ErrExists, dir)
	}
	return err
}

// LeftoverError is the error of a replacement that installed the new
// folder but could not remove the earlier one, moved aside to Old
// (Check refuses such a folder beforehand; this is for one changed while
// the new folder was written).
type LeftoverError struct {
	Dir, Old string
	Err      error
}

func (e *LeftoverError) Error() string {
	return fmt.Sprintf("%s is in place, but the earlier folder moved to %s could not be removed (%v): delete it by hand", e.Dir, e.Old, e.Err)
}

func (e *LeftoverError) Unwrap() error { return e.Err }

// removeOld removes the earlier folder old after dir was installed.
func removeOld(dir, old string) error {
	if err := os.RemoveAll(old); err != nil {
		return &LeftoverError{Dir: dir, Old: old, Err: err}
	}
	return nil
}
