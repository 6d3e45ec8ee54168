package result

import (
	"fmt"

	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// ErrExists is wrapped by the errors of Check, New and Commit when the
// result folder exists and replacing it was not asked for. It is the
// error every folder writer of the module wraps in that case (response
// bundles and demo folders too), and errors.Is(err, fs.ErrExist) holds
// as well.
var ErrExists = atomicfile.ErrExists

// ErrNotResult is wrapped by the errors of Check, New and Commit when
// replacing was asked for but the existing path is not an earlier result
// folder: not a folder, or a folder that is neither empty nor holds a
// result.json. It keeps a mistyped output path from wiping an unrelated
// folder. Other folder writers of the module wrap the same error when
// the folder is not an earlier one of their kind.
var ErrNotResult = atomicfile.ErrNotOurs

// Check reports whether a result folder could be written at path: nil
// when nothing exists there, or when replace is set and the path is an
// empty folder or one holding a result.json. Otherwise it returns an
// error wrapping ErrExists or ErrNotResult, or the error of looking at
// the path. Commands call it before a long computation, so that a
// refused folder is reported at once; New and Commit check again.
func Check(path string, replace bool) error {
	if err := atomicfile.Check(path, JSONFile, replace); err != nil {
		return fmt.Errorf("result: %w", err)
	}
	return nil
}

// Folder is a result folder being written: files go into a hidden
// temporary sibling folder, and Commit renames it into place (see New).
type Folder = atomicfile.Folder

// New starts a result folder that Commit will put at path. With replace
// false an existing path is refused (ErrExists); with replace true an
// existing empty folder or earlier result folder is replaced by Commit
// (anything else is refused with ErrNotResult). Missing parent folders
// are created (and removed again by Abort if still empty).
//
// Always pair New with a deferred Abort: after a successful Commit, Abort
// does nothing.
func New(path string, replace bool) (*Folder, error) {
	f, err := atomicfile.New(path, JSONFile, replace)
	if err != nil {
		return nil, fmt.Errorf("result: %w", err)
	}
	return f, nil
}
