//go:build linux

package atomicfile

import (
	"errors"
	"os"

	"golang.org/x/sys/unix"
)

// renameNoReplace renames the folder from to the path to, failing with
// an error satisfying errors.Is(err, fs.ErrExist) when to exists. On
// Linux this is a single atomic renameat2(RENAME_NOREPLACE); on
// filesystems without it, a check followed by a rename.
func renameNoReplace(from, to string) error {
	err := unix.Renameat2(unix.AT_FDCWD, from, unix.AT_FDCWD, to, unix.RENAME_NOREPLACE)
	if errors.Is(err, unix.EINVAL) || errors.Is(err, unix.ENOSYS) {
		return renameCheck(from, to)
	}
	if err != nil {
		return &os.LinkError{Op: "rename", Old: from, New: to, Err: err}
	}
	return nil
}

// exchange atomically swaps the folders at a and b, reporting false when
// the system or filesystem cannot (the caller then falls back to two
// renames).
func exchange(a, b string) (bool, error) {
	err := unix.Renameat2(unix.AT_FDCWD, a, unix.AT_FDCWD, b, unix.RENAME_EXCHANGE)
	if errors.Is(err, unix.EINVAL) || errors.Is(err, unix.ENOSYS) {
		return false, nil
	}
	if err != nil {
		return false, &os.LinkError{Op: "exchange", Old: a, New: b, Err: err}
	}
	return true, nil
}

// canRemoveIn reports an error when the entry at path stands in the way
// of removing a folder: a folder that is not writable and searchable
// (its entries cannot be unlinked), or a file marked immutable or
// append-only (access reports EPERM for writing it, even to root). A
// file merely without write permission is removable and passes.
func canRemoveIn(path string, dir bool) error {
	if dir {
		if err := unix.Access(path, unix.W_OK|unix.X_OK); err != nil {
			return &os.PathError{Op: "remove", Path: path, Err: err}
		}
		return nil
	}
	if err := unix.Access(path, unix.W_OK); errors.Is(err, unix.EPERM) {
		return &os.PathError{Op: "remove", Path: path, Err: err}
	}
	return nil
}
