package atomicfile

import (
	"bufio"
	"io"
	"os"
	"path/filepath"
)

// Write writes the file path atomically: write fills a hidden temporary
// file beside path (".NAME.tmp-XXXX") through a buffer; the file is then
// flushed, synced to disk, given mode 0644 and renamed to path, and the
// folder is synced so that the rename survives a crash. An existing file
// at path is replaced. On error (of write or of any step) the temporary
// file is removed and path is left as it was; the error is returned as
// it came, for the caller to say which file it was writing.
func Write(path string, write func(io.Writer) error) error {
	return WriteVia(path, func(tmp string) error {
		f, err := os.OpenFile(tmp, os.O_WRONLY|os.O_TRUNC, 0)
		if err != nil {
			return err
		}
		bw := bufio.NewWriterSize(f, 1<<16)
		err = write(bw)
		if err == nil {
			err = bw.Flush()
		}
		if cerr := f.Close(); err == nil {
			err = cerr
		}
		return err
	})
}

// WriteVia is Write for writers that create the file themselves from a
// path (a ROOT file library, for example): write gets the path of the
// temporary file, already created empty, and must have written and
// closed it when it returns. The temporary file keeps the extension of
// path, for libraries that look at it.
func WriteVia(path string, write func(tmp string) error) (err error) {
	dir, base := filepath.Split(path)
	if dir == "" {
		dir = "."
	}
	f, err := os.CreateTemp(dir, "."+base+".tmp-*"+filepath.Ext(base))
	if err != nil {
		return err
	}
	tmp := f.Name()
	f.Close()
	defer func() {
		if err != nil {
			os.Remove(tmp)
		}
	}()
	if err := write(tmp); err != nil {
		return err
	}
	if err := syncPath(tmp, false); err != nil {
		return err
	}
	// os.CreateTemp makes the file private (0600); an output file gets
	// the usual mode.
	if err := os.Chmod(tmp, 0o644); err != nil {
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		return err
	}
	// The file is in place; a failing sync of the folder is not worth
	// failing for.
	_ = syncPath(dir, true)
	return nil
}
