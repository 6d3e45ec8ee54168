package atomicfile

import (
	"bufio"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
)

type state int

const (
	writing state = iota
	committed
	aborted
)

// Folder is a folder being written. Files go into a hidden
// temporary sibling folder (".NAME.partial-XXXX" beside the final path);
// Commit flushes every file and folder to disk and renames the temporary
// folder into place, so that the final path holds either nothing (or the
// earlier folder) or the complete new one, never a part of it.
//
// The methods of a Folder may be called from several goroutines; a File
// is for one goroutine at a time.
type Folder struct {
	mu      sync.Mutex
	path    string // final path, cleaned
	tmp     string // temporary sibling folder
	marker  string // the file naming an earlier folder of this kind
	replace bool
	created string // topmost parent folder New created, "" if none
	names   map[string]bool
	dirs    []string // sub-folders created inside tmp, relative
	files   []*File  // files handed out by Create
	reserve []string // names handed out by Reserve
	st      state
}

// New starts a folder that Commit will put at path; marker is the name
// of the file that identifies an earlier folder of the same kind (see
// Check). With replace false an existing path is refused (ErrExists);
// with replace true an existing empty folder or earlier folder is
// replaced by Commit (anything else is refused with ErrNotOurs). Missing
// parent folders are created (and removed again by Abort if still
// empty).
//
// Always pair New with a deferred Abort: after a successful Commit, Abort
// does nothing.
func New(path, marker string, replace bool) (*Folder, error) {
	clean := filepath.Clean(path)
	base := filepath.Base(clean)
	if path == "" || base == "." || base == ".." || base == string(filepath.Separator) {
		return nil, fmt.Errorf("%q cannot be an output folder; name a folder to create", path)
	}
	if err := Check(clean, marker, replace); err != nil {
		return nil, err
	}
	f := &Folder{path: clean, marker: marker, replace: replace, names: map[string]bool{}}
	parent := filepath.Dir(clean)
	if _, err := os.Stat(parent); errors.Is(err, fs.ErrNotExist) {
		f.created = topmostMissing(parent)
		if err := os.MkdirAll(parent, 0o777); err != nil {
			f.removeCreated()
			return nil, err
		}
	}
	tmp, err := os.MkdirTemp(parent, partialPattern(base))
	if err != nil {
		f.removeCreated()
		return nil, err
	}
	f.tmp = tmp
	return f, nil
}

// topmostMissing returns the topmost ancestor of dir (or dir itself)
// that does not exist.
func topmostMissing(dir string) string {
	top := dir
	for d := dir; ; {
		if _, err := os.Lstat(d); err == nil {
			return top
		}
		top = d
		up := filepath.Dir(d)
		if up == d {
			return top
		}
		d = up
	}
}

// removeCreated removes the parent folders New created, deepest first,
// as long as they are empty.
func (f *Folder) removeCreated() {
	if f.created == "" {
		return
	}
	for d := filepath.Dir(f.path); ; d = filepath.Dir(d) {
		if os.Remove(d) != nil || d == f.created || filepath.Dir(d) == d {
			return
		}
	}
}

// Path returns the final path of the folder.
func (f *Folder) Path() string { return f.path }

// Dir returns the temporary folder the files are written in until
// Commit. A writer may create files or folders there directly (for
// example another Folder, committed inside it before this one); they are
// installed with the rest by Commit, which syncs only the files it
// handed out, so such a writer syncs its own.
func (f *Folder) Dir() string { return f.tmp }

// claim validates a file name and reserves it, creating its sub-folders
// inside the temporary folder. It must be called with f.mu held.
func (f *Folder) claim(name string) (string, error) {
	if f.st != writing {
		return "", fmt.Errorf("%s: the folder is already %s", name, map[state]string{committed: "committed", aborted: "aborted"}[f.st])
	}
	if !fs.ValidPath(name) || name == "." || strings.Contains(name, `\`) {
		return "", fmt.Errorf("%q is not a valid file name inside an output folder (use a relative slash-separated path without ..)", name)
	}
	if f.names[name] {
		return "", fmt.Errorf("%s is written twice", name)
	}
	for d := range f.names {
		if strings.HasPrefix(name, d+"/") || strings.HasPrefix(d, name+"/") {
			return "", fmt.Errorf("%s clashes with %s (a file and a folder of the same name)", name, d)
		}
	}
	if dir := filepath.Dir(filepath.FromSlash(name)); dir != "." {
		if err := os.MkdirAll(filepath.Join(f.tmp, dir), 0o777); err != nil {
			return "", err
		}
		for d := dir; d != "."; d = filepath.Dir(d) {
			if !slices.Contains(f.dirs, d) {
				f.dirs = append(f.dirs, d)
			}
		}
	}
	f.names[name] = true
	return filepath.Join(f.tmp, filepath.FromSlash(name)), nil
}

// Create creates the file name (a slash-separated path relative to the
// folder, sub-folders created as needed) and returns it for writing. The
// file is buffered; Close flushes it and syncs it to disk. Commit closes
// files that are still open.
func (f *Folder) Create(name string) (*File, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	p, err := f.claim(name)
	if err != nil {
		return nil, err
	}
	osf, err := os.OpenFile(p, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o666)
	if err != nil {
		return nil, err
	}
	file := &File{name: name, f: osf, w: bufio.NewWriterSize(osf, 1<<16)}
	f.files = append(f.files, file)
	return file, nil
}

// WriteFile writes data to the file name of the folder.
func (f *Folder) WriteFile(name string, data []byte) error {
	w, err := f.Create(name)
	if err != nil {
		return err
	}
	if _, err := w.Write(data); err != nil {
		w.Close()
		return err
	}
	return w.Close()
}

// Reserve reserves the file name for a writer that needs a file path
// (for example a library that creates its own files) and returns the
// path inside the temporary folder to write it at. The file must exist
// when Commit is called; Commit syncs it to disk.
func (f *Folder) Reserve(name string) (string, error) {
	f.mu.Lock()
	defer f.mu.Unlock()
	p, err := f.claim(name)
	if err != nil {
		return "", err
	}
	f.reserve = append(f.reserve, name)
	return p, nil
}

// Commit closes the files still open, syncs every file and folder to
// disk and renames the temporary folder to the final path. When replace
// was asked for and the path holds an earlier folder, the two are
// exchanged in one atomic step where the system allows it (Linux
// renameat2), otherwise the old folder is first renamed aside; the old
// folder is then removed. On error nothing is installed, and the caller's
// deferred Abort removes the temporary folder.
func (f *Folder) Commit() error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.st != writing {
		return fmt.Errorf("Commit of a folder already %s", map[state]string{committed: "committed", aborted: "aborted"}[f.st])
	}
	var first error
	for _, file := range f.files {
		if err := file.Close(); err != nil && first == nil {
			first = err
		}
	}
	if first != nil {
		return first
	}
	for _, name := range f.reserve {
		if err := syncPath(filepath.Join(f.tmp, filepath.FromSlash(name)), false); err != nil {
			if errors.Is(err, fs.ErrNotExist) {
				return fmt.Errorf("%s was reserved but not written", name)
			}
			return err
		}
	}
	// Sub-folders deepest first, then the folder itself.
	dirs := slices.Clone(f.dirs)
	slices.SortFunc(dirs, func(a, b string) int {
		return strings.Count(b, string(filepath.Separator)) - strings.Count(a, string(filepath.Separator))
	})
	for _, d := range dirs {
		if err := syncPath(filepath.Join(f.tmp, d), true); err != nil {
			return err
		}
	}
	// os.MkdirTemp makes the folder private (0700); give it the usual mode.
	if err := os.Chmod(f.tmp, 0o755); err != nil {
		return err
	}
	if err := syncPath(f.tmp, true); err != nil {
		return err
	}
	if err := f.install(); err != nil {
		var le *LeftoverError
		if errors.As(err, &le) {
			f.st = committed // the new folder is in place
		}
		return err
	}
	f.st = committed
	return nil
}

// install puts the temporary folder at the final path, checking again
// that an existing path may be replaced.
func (f *Folder) install() error {
	if _, err := os.Lstat(f.path); err == nil && f.replace {
		if err := Check(f.path, f.marker, true); err != nil {
			return err
		}
	}
	err := installDir(f.tmp, f.path, f.replace)
	if errors.Is(err, ErrExists) {
		return fmt.Errorf("%w: %s (it appeared while the folder was being written)", ErrExists, f.path)
	}
	return err
}

// Abort removes the temporary folder and everything written to it, and
// the parent folders New created if they are empty. It does nothing after
// a successful Commit and may be called more than once.
func (f *Folder) Abort() error {
	f.mu.Lock()
	defer f.mu.Unlock()
	if f.st != writing {
		return nil
	}
	f.st = aborted
	for _, file := range f.files {
		file.abandon()
	}
	err := os.RemoveAll(f.tmp)
	f.removeCreated()
	return err
}

// renameCheck renames from to to after checking that to does not exist.
func renameCheck(from, to string) error {
	if _, err := os.Lstat(to); err == nil {
		return &os.LinkError{Op: "rename", Old: from, New: to, Err: fs.ErrExist}
	}
	return os.Rename(from, to)
}

// syncPath opens path and syncs it to disk.
func syncPath(path string, dir bool) error {
	h, err := os.Open(path)
	if err != nil {
		return err
	}
	err = h.Sync()
	if dir && err != nil {
		// Some filesystems cannot sync folders; that is not an error of
		// the content.
		err = nil
	}
	if cerr := h.Close(); err == nil {
		err = cerr
	}
	return err
}

// File is a file of a folder being written.
type File struct {
	name   string
	f      *os.File
	w      *bufio.Writer
	closed bool
	err    error
}

// Name returns the file's name inside the folder.
func (w *File) Name() string { return w.name }

// Write writes p to the file.
func (w *File) Write(p []byte) (int, error) {
	if w.closed {
		return 0, fmt.Errorf("write to closed %s", w.name)
	}
	return w.w.Write(p)
}

// WriteString writes s to the file.
func (w *File) WriteString(s string) (int, error) {
	if w.closed {
		return 0, fmt.Errorf("write to closed %s", w.name)
	}
	return w.w.WriteString(s)
}

// Close flushes the file, syncs it to disk and closes it. Later calls
// return the result of the first.
func (w *File) Close() error {
	if w.closed {
		return w.err
	}
	w.closed = true
	err := w.w.Flush()
	if err == nil {
		err = w.f.Sync()
	}
	if cerr := w.f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		w.err = fmt.Errorf("%s: %w", w.name, err)
	}
	return w.err
}

// abandon closes the file without flushing.
func (w *File) abandon() {
	if !w.closed {
		w.closed = true
		w.f.Close()
	}
}
