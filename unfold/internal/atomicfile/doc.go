// Package atomicfile holds every atomic write of the module and the one
// rule saying which existing folder a writer may replace.
//
// A single file is written with Write (through an io.Writer) or WriteVia
// (for libraries that create the file themselves from a path): into a
// hidden temporary file beside the target, synced to disk, renamed into
// place, and the rename made durable by syncing the folder. The target
// then holds either its old content or the whole new one.
//
// A folder is written with a Folder: New starts it in a hidden temporary
// sibling folder (".NAME.partial-XXXX"); Create, WriteFile and Reserve
// add files; Commit syncs everything and renames the folder into place;
// Abort (deferred right after New) removes the temporary folder when the
// writing fails or is interrupted:
//
//	f, err := atomicfile.New(dir, "result.json", replace)
//	if err != nil { ... }
//	defer f.Abort()
//	... f.WriteFile(name, data); w, _ := f.Create(name) ...
//	return f.Commit()
//
// Check is the replace rule: a path that does not exist may be written;
// an existing one only when replacing is asked for and it is an empty
// folder or holds the marker file naming an earlier folder of the same
// kind (result.json for a result folder, response.json for a response
// bundle, ...). Otherwise the error wraps ErrExists or ErrNotOurs, which
// the callers wrap in turn with what the folder is. New checks when it
// starts and Commit checks again before the rename.
//
// On Linux a replacement is one atomic exchange of the two folders
// (renameat2 RENAME_EXCHANGE) and a new folder is installed with
// RENAME_NOREPLACE; elsewhere, and on filesystems without these, the old
// folder is renamed aside first and a check precedes the rename. A
// process killed (not interrupted) while writing can leave a hidden
// ".NAME.partial-XXXX" folder or ".NAME.tmp-XXXX" file beside the
// target; it is safe to delete.
package atomicfile
