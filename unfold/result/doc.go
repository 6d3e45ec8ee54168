// Package result writes result folders atomically and defines the
// schema of result.json.
//
// A result folder is written in three steps: New starts it in a hidden
// temporary sibling folder; Create, WriteFile, WriteJSON, Reserve and
// WriteResult add files; Commit syncs everything to disk and renames the
// temporary folder into place. Abort (deferred right after New) removes
// the temporary folder when the run fails or is interrupted, so that a
// failed run leaves no half-written result:
//
//	f, err := result.New(dir, force)
//	if err != nil { ... }
//	defer f.Abort()
//	... f.WriteResult(res, scheme); f.WriteJSON("extra.json", v) ...
//	return f.Commit()
//
// An existing folder is refused (ErrExists) unless replacing is asked
// for, and even then only an empty folder or an earlier result (a folder
// holding result.json) is replaced (ErrNotResult otherwise). On Linux
// the replacement is one atomic exchange of the two folders
// (renameat2 RENAME_EXCHANGE), and a new folder is installed with
// RENAME_NOREPLACE; elsewhere, and on filesystems without these, the old
// folder is renamed aside first and a check precedes the rename. A process
// killed (not interrupted) while writing can leave a hidden
// ".NAME.partial-XXXX" folder beside the result; it is safe to delete.
//
// Folders that are not result folders (a response bundle, a demo
// folder) are installed the same way with Temp and Install: the caller
// writes its files into the folder Temp makes, decides itself which
// existing folder it may replace, and Install renames the folder into
// place with the same atomic steps as Commit.
//
// Result is the documented schema of result.json (see its fields);
// FromUnfold fills it from the kernel's result and guarantees that no
// number is NaN or infinite (JSON has no such values; bins the response
// cannot measure are flagged in Determined and hold 0). WriteCSV writes
// the per-bin table result.csv.
//
// Errors: every function returns errors; nothing panics on any input.
package result
