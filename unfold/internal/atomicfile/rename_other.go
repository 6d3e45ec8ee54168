//go:build !linux

package atomicfile

// renameNoReplace renames the folder from to the path to, failing with
// an error satisfying errors.Is(err, fs.ErrExist) when to exists: a check
// followed by a rename, as this system offers no atomic no-replace
// rename through the standard library.
func renameNoReplace(from, to string) error { return renameCheck(from, to) }

// exchange reports false: no atomic exchange here; the caller falls back
// to two renames.
func exchange(a, b string) (bool, error) { return false, nil }
