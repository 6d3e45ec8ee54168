package result

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
)

// partialPattern is the os.MkdirTemp pattern of the temporary sibling
// folder of the folder named base: ".NAME.partial-XXXX".
func partialPattern(base string) string { return "." + base + ".partial-" }

// Temp creates the hidden temporary sibling folder (".NAME.partial-XXXX"
// beside dir) in which a caller writes a folder that Install then puts
// at dir, creating dir's parent folders if they are missing. It is for
// folders that are not result folders (a Folder does all of this
// itself); the caller removes the temporary folder when the writing
// fails. The folder gets mode 0755, as a result folder does, so the
// installed folder is not private.
func Temp(dir string) (string, error) {
	parent := filepath.Dir(filepath.Clean(dir))
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return "", err
	}
	tmp, err := os.MkdirTemp(parent, partialPattern(filepath.Base(filepath.Clean(dir))))
	if err != nil {
		return "", err
	}
	if err := os.Chmod(tmp, 0o755); err != nil {
		os.Remove(tmp)
		return "", err
	}
	return tmp, nil
}

// WriteSynced creates (or truncates) the file path, writes it through
// write with a buffer, then flushes it, syncs it to disk and closes it:
// a file of a folder made by Temp, before Install. On error the file may
// hold part of its content; the caller removes the temporary folder.
func WriteSynced(path string, write func(io.Writer) error) error {
	f, err := os.Create(path)
	if err != nil {
		return err
	}
	bw := bufio.NewWriterSize(f, 1<<16)
	err = write(bw)
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	return err
}

// noExchange makes Install take the fallback path (for tests).
var noExchange = false

// Install puts the completed folder tmp at the path dir by renaming it,
// so that dir holds either what it held before or all of tmp, never a
// part of it. tmp must be on the same filesystem as dir; a sibling made
// by Temp is. Files in tmp should already be synced to disk; Install
// makes the rename itself durable by syncing dir's parent.
//
// With replace false an existing dir is refused with an error wrapping
// ErrExists, also when it appears while Install runs: on Linux the rename
// is one renameat2(RENAME_NOREPLACE), elsewhere and on filesystems
// without it a check precedes the rename. With replace true an existing
// dir is replaced whatever it holds, and its old content is removed; on
// Linux the two are exchanged in one atomic step (renameat2
// RENAME_EXCHANGE), elsewhere the old one is first renamed aside (to a
// hidden ".NAME.old-XXXX" sibling) and put back if the second rename
// fails. Install does not look inside an existing dir: which folders may
// be replaced is the caller's decision (Check makes it for result
// folders), taken before calling Install.
//
// On error nothing is installed, dir is left as it was and tmp is left
// for the caller to remove.
func Install(tmp, dir string, replace bool) error {
	dir = filepath.Clean(dir)
	if err := install(tmp, dir, replace); err != nil {
		return err
	}
	// The folder is in place; a failing sync of the parent is not worth
	// failing for.
	_ = syncPath(filepath.Dir(dir), true)
	return nil
}

func install(tmp, dir string, replace bool) error {
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
			_ = os.RemoveAll(tmp)
			return nil
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
		_ = os.RemoveAll(aside)
		return nil
	}
	err := renameNoReplace(tmp, dir)
	if errors.Is(err, fs.ErrExist) {
		return fmt.Errorf("%w: %s", ErrExists, dir)
	}
	return err
}
