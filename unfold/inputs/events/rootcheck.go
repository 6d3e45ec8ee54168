package events

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"fmt"
	"io"
	"os"

	"github.com/pierrec/xxHash/xxHash64"
)

// checkROOTBaskets verifies the checksum of every compressed block of
// every basket in the ROOT file at path, which go-hep does not do
// (v0.36.0 skips the XXH64 sum of LZ4 blocks and stops reading a zlib
// stream before its Adler-32 sum). It walks the file's records from the
// first to the end as laid out by ROOT (a key header, then the payload),
// and for each TBasket holding compressed blocks checks LZ4 blocks
// against their XXH64 sum and zlib blocks against their Adler-32 sum
// (by decompressing them). Other compression kinds and baskets stored
// uncompressed carry no checksum and cannot be checked. The error names
// the branch (the basket's key name) and the byte offset.
func checkROOTBaskets(path string) error {
	f, err := os.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	var hdr [20]byte
	if _, err := f.ReadAt(hdr[:], 0); err != nil {
		return fmt.Errorf("damaged ROOT file: header: %v", err)
	}
	version := int32(binary.BigEndian.Uint32(hdr[4:]))
	pos := int64(binary.BigEndian.Uint32(hdr[8:]))
	end := int64(binary.BigEndian.Uint32(hdr[12:]))
	if version >= 1000000 {
		end = int64(binary.BigEndian.Uint64(hdr[12:]))
	}
	var key [256 + 64]byte
	for pos < end {
		n, _ := f.ReadAt(key[:], pos)
		if n < 4 {
			return fmt.Errorf("damaged ROOT file: record at byte %d cut short", pos)
		}
		nbytes := int64(int32(binary.BigEndian.Uint32(key[:])))
		if nbytes < 0 { // a free gap
			pos -= nbytes
			continue
		}
		if nbytes < 26 || n < 26 || pos+nbytes > end {
			return fmt.Errorf("damaged ROOT file: record at byte %d of %d bytes does not fit", pos, nbytes)
		}
		kversion := int16(binary.BigEndian.Uint16(key[4:]))
		objlen := int64(int32(binary.BigEndian.Uint32(key[6:])))
		keylen := int64(int16(binary.BigEndian.Uint16(key[14:])))
		s := 26
		if kversion > 1000 {
			s = 34
		}
		class, s, ok := tstring(key[:n], s)
		name, _, ok2 := tstring(key[:n], s)
		if ok && ok2 && class == "TBasket" && keylen > 0 && keylen < nbytes && objlen != nbytes-keylen {
			payload := make([]byte, nbytes-keylen)
			if _, err := f.ReadAt(payload, pos+keylen); err != nil {
				return fmt.Errorf("damaged ROOT file: basket at byte %d: %v", pos, err)
			}
			if why := checkBlocks(payload); why != "" {
				return fmt.Errorf("branch %q: the basket at byte %d is damaged (%s)", name, pos, why)
			}
		}
		pos += nbytes
	}
	return nil
}

// tstring decodes a ROOT TString at b[s:]: one length byte (255: a
// 4-byte length follows), then the bytes.
func tstring(b []byte, s int) (string, int, bool) {
	if s >= len(b) {
		return "", s, false
	}
	n := int(b[s])
	s++
	if n == 255 {
		if s+4 > len(b) {
			return "", s, false
		}
		n = int(binary.BigEndian.Uint32(b[s:]))
		s += 4
	}
	if n < 0 || s+n > len(b) {
		return "", s, false
	}
	return string(b[s : s+n]), s + n, true
}

// checkBlocks checks the compressed blocks of a basket's payload, each a
// 9-byte header (algorithm, method, compressed and uncompressed sizes of
// 3 bytes little-endian) then the block; it returns what is wrong, or "".
func checkBlocks(p []byte) string {
	for len(p) > 0 {
		if len(p) < 9 {
			return "a block header cut short"
		}
		src := int(p[3]) | int(p[4])<<8 | int(p[5])<<16
		tgt := int(p[6]) | int(p[7])<<8 | int(p[8])<<16
		if 9+src > len(p) {
			return "a block longer than the basket"
		}
		block := p[9 : 9+src]
		switch string(p[:2]) {
		case "L4":
			if len(block) < 8 || binary.BigEndian.Uint64(block) != xxHash64.Checksum(block[8:], 0) {
				return "LZ4 block checksum mismatch"
			}
		case "ZL":
			zr, err := zlib.NewReader(bytes.NewReader(block))
			if err != nil {
				return "zlib block: " + err.Error()
			}
			got, err := io.Copy(io.Discard, zr)
			if err != nil {
				return "zlib block: " + err.Error()
			}
			if got != int64(tgt) {
				return fmt.Sprintf("zlib block of %d bytes, want %d", got, tgt)
			}
		}
		p = p[9+src:]
	}
	return ""
}
