// Package inputs records the provenance of input files: the File record
// (role, path, size, SHA-256) that result folders and response bundles
// keep of every file they were made from, and the hashing that fills it,
// in the same pass that parses a file (HashingReader) or on its own
// (Hash). Its subpackages read the inputs: events (event files),
// observable (the expression language) and tables (plain tables).
package inputs

import (
	"crypto/sha256"
	"encoding/hex"
	"hash"
	"io"
	"os"
)

// File is one input file: its role (for example "response", "data",
// "truth-binning"), its path as given, its size in bytes and the SHA-256
// of its content (lower-case hex).
type File struct {
	Role   string `json:"role"`
	Path   string `json:"path"`
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
}

// HashingReader passes the reads of an underlying reader through and
// computes the SHA-256 and size of everything that passed, so that an
// input file is hashed in the same pass that parses it.
type HashingReader struct {
	r io.Reader
	h hash.Hash
	n int64
}

// NewHashingReader returns a HashingReader reading from r.
func NewHashingReader(r io.Reader) *HashingReader {
	return &HashingReader{r: r, h: sha256.New()}
}

// Read reads from the underlying reader and hashes what it returns.
func (h *HashingReader) Read(p []byte) (int, error) {
	n, err := h.r.Read(p)
	h.h.Write(p[:n])
	h.n += int64(n)
	return n, err
}

// File reads the underlying reader to its end (so the hash covers the
// whole content even if the parser stopped early) and returns the File
// record of role and path.
func (h *HashingReader) File(role, path string) (File, error) {
	if _, err := io.Copy(io.Discard, h); err != nil {
		return File{}, err
	}
	return File{Role: role, Path: path, Bytes: h.n, SHA256: hex.EncodeToString(h.h.Sum(nil))}, nil
}

// Hash returns the File record of the file at path.
func Hash(role, path string) (File, error) {
	f, err := os.Open(path)
	if err != nil {
		return File{}, err
	}
	defer f.Close()
	return NewHashingReader(f).File(role, path)
}
