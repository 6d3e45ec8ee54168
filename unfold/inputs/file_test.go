package inputs

import (
	"strings"
	"testing"
)

// SHA-256 of "abc": the FIPS 180-2 test vector (NIST, Secure Hash
// Standard, 2002, appendix B.1).
func TestHashingReader(t *testing.T) {
	h := NewHashingReader(strings.NewReader("abc"))
	buf := make([]byte, 1)
	h.Read(buf) // a parser that stops early: File reads the rest
	in, err := h.File("data", "n.csv")
	if err != nil {
		t.Fatal(err)
	}
	if in.SHA256 != "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad" || in.Bytes != 3 {
		t.Errorf("got %+v", in)
	}
}
