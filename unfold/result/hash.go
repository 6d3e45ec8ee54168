package result

import (
	"crypto/sha256"
	"encoding/hex"
	"hash"
	"io"
	"os"
)

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

// Input reads the underlying reader to its end (so the hash covers the
// whole content even if the parser stopped early) and returns the Input
// record of role and path.
func (h *HashingReader) Input(role, path string) (Input, error) {
	if _, err := io.Copy(io.Discard, h); err != nil {
		return Input{}, err
	}
	return Input{Role: role, Path: path, Bytes: h.n, SHA256: hex.EncodeToString(h.h.Sum(nil))}, nil
}

// HashFile returns the Input record of the file at path.
func HashFile(role, path string) (Input, error) {
	f, err := os.Open(path)
	if err != nil {
		return Input{}, err
	}
	defer f.Close()
	return NewHashingReader(f).Input(role, path)
}
