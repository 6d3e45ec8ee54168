package rootio

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"fmt"
	"io"

	"github.com/pierrec/xxHash/xxHash64"
)

// CheckFile checks the layout of the ROOT file of size bytes in r before
// go-hep reads it, and the checksums go-hep does not verify. go-hep
// v0.36.0 allocates every length the file declares before reading (the
// free-segment and streamer records, the key list, the uncompressed size
// of every record, up to 2 GB each for one damaged byte), skips the XXH64
// sum of LZ4 blocks and stops reading a zlib stream before its Adler-32
// sum. So:
//
//   - the header's end, and the records it points to (free segments,
//     streamer information, the top directory's key list), must lie
//     inside the file;
//   - every record, from the first to the end as laid out by ROOT (a key
//     header, then the payload), must fit in the file, and a compressed
//     one must consist of whole blocks whose uncompressed sizes add up to
//     the record's declared size, each no larger than its algorithm can
//     expand (zlib 1032:1, LZ4 255:1);
//   - the LZ4 blocks of every basket match their XXH64 sum, and its zlib
//     blocks their Adler-32 sum (by decompressing them). Other compression
//     kinds, and baskets stored uncompressed, carry no checksum and cannot
//     be checked;
//   - every key of the top directory's key list has its strings inside
//     it and the sizes of the record it points to;
//   - the objects of the streamer, tree and histogram records declare no
//     count or length beyond the bytes that remain (objects.go), and the
//     baskets a branch points to are records whose headers fit.
//
// A file without ROOT's magic is left to go-hep to refuse. The error names
// the byte offset, and the branch (the basket's key name) for a basket.
func CheckFile(r io.ReaderAt, size int64) error {
	var hdr [64]byte
	n, _ := r.ReadAt(hdr[:], 0)
	if n < 4 || string(hdr[:4]) != "root" {
		return nil
	}
	if n < 57 {
		return fmt.Errorf("damaged ROOT file: header cut short (%d bytes)", n)
	}
	be := binary.BigEndian
	i32 := func(o int) int64 { return int64(int32(be.Uint32(hdr[o:]))) }
	version := i32(4)
	begin := i32(8)
	var end, seekfree, nbytesfree, nbytesname, seekinfo, nbytesinfo int64
	if version < 1000000 {
		end, seekfree, nbytesfree, nbytesname = i32(12), i32(16), i32(20), i32(28)
		seekinfo, nbytesinfo = i32(37), i32(41)
	} else {
		end, seekfree, nbytesfree, nbytesname = int64(be.Uint64(hdr[12:])), int64(be.Uint64(hdr[20:])), i32(28), i32(36)
		seekinfo, nbytesinfo = int64(be.Uint64(hdr[45:])), i32(53)
	}
	if begin <= 0 || end < begin || end > size {
		return fmt.Errorf("damaged ROOT file: the header says the records lie between bytes %d and %d, but the file has %d bytes", begin, end, size)
	}
	for _, rec := range []struct {
		what        string
		seek, bytes int64
	}{{"free-segment", seekfree, nbytesfree}, {"streamer", seekinfo, nbytesinfo}} {
		if rec.seek <= 0 {
			continue
		}
		if rec.bytes < 0 || rec.seek > size || rec.bytes > size-rec.seek {
			return fmt.Errorf("damaged ROOT file: the %s record of %d bytes at byte %d lies outside the file of %d bytes", rec.what, rec.bytes, rec.seek, size)
		}
		if _, err := checkRecord(r, rec.what+" record", rec.seek, size, "", nil); err != nil {
			return err
		}
		// go-hep decodes the streamer information by its key's class,
		// and one it does not know from the streamer information
		// itself, which can hang (v0.36.0): ROOT writes a TList (ROOT
		// file format, common practice).
		if k, _ := readKey(r, rec.seek, size); rec.what == "streamer" && k.class != "TList" {
			return fmt.Errorf("damaged ROOT file: the streamer record at byte %d is a %q, not a TList; the file cannot be read: write it again or restore it from a copy", rec.seek, k.class)
		}
	}
	if err := checkKeyList(r, begin+nbytesname, size); err != nil {
		return err
	}
	records := map[int64]int64{}
	var baskets []basketRef
	for pos := begin; pos < end; {
		var nb [4]byte
		if n, _ := r.ReadAt(nb[:], pos); n < 4 {
			return fmt.Errorf("damaged ROOT file: record at byte %d cut short", pos)
		}
		if nbytes := int64(int32(be.Uint32(nb[:]))); nbytes < 0 { // a free gap
			if -nbytes > end-pos {
				return fmt.Errorf("damaged ROOT file: a free gap of %d bytes at byte %d runs past the end of the records at byte %d", -nbytes, pos, end)
			}
			pos -= nbytes
			continue
		}
		nbytes, err := checkRecord(r, "record", pos, end, "", &baskets)
		records[pos] = nbytes
		if err != nil {
			return err
		}
		pos += nbytes
	}
	for _, b := range baskets {
		if err := checkBasket(r, b, records); err != nil {
			return err
		}
	}
	return nil
}

// checkBasket checks a basket a branch points to, as go-hep v0.36.0 reads
// it (with the branch's size and place, then the basket's header after
// its key: version, buffer size, entry size, number of entries, the end
// of the data and a flag; ROOT's TBasket streamer, from memory): it must
// be a record of the file of that size, and the header's counts must fit
// in it. go-hep reads baskets in goroutines of its own, where a panic
// ends the process.
func checkBasket(r io.ReaderAt, b basketRef, records map[int64]int64) error {
	nbytes, ok := records[b.seek]
	if !ok || nbytes != b.bytes {
		return fmt.Errorf("damaged ROOT file: a branch says a basket of %d bytes lies at byte %d, where the file has no such record", b.bytes, b.seek)
	}
	k, why := readKey(r, b.seek, b.seek+nbytes)
	if why == "" && k.class != "TBasket" {
		why = fmt.Sprintf("is a %s", k.class)
	}
	if why == "" {
		head := make([]byte, k.keylen)
		r.ReadAt(head, b.seek)
		why = basketHeader(head, nbytes, func() []byte {
			all := make([]byte, nbytes)
			r.ReadAt(all, b.seek)
			return all
		})
	}
	if why != "" {
		return fmt.Errorf("branch %q: the basket at byte %d is damaged (its header %s)", k.name, b.seek, why)
	}
	return nil
}

// basketHeader checks the basket header at the end of the key header
// head, of a basket of nbytes bytes, all of which whole returns; it
// returns what is wrong, or "".
func basketHeader(head []byte, nbytes int64, whole func() []byte) string {
	be := binary.BigEndian
	s := 26
	if int16(be.Uint16(head[4:])) > 1000 {
		s = 34
	}
	for range 3 { // class, name, title
		var ok bool
		if _, s, ok = tstring(head, s); !ok {
			return "is cut short"
		}
	}
	w := walker{b: head, pos: s}
	end := len(head)
	vers := int16(w.u16(end))
	w.skip(4, end) // buffer size
	if nev := int32(w.u32(end)); nev < 0 {
		w.skipObject(end) // I/O features
	}
	nevbuf := int32(w.u32(end))
	last := int64(int32(w.u32(end)))
	var flag byte
	if w.need(1, end, "the flag") {
		flag = w.b[w.pos]
		w.pos++
	}
	if w.done() {
		return w.why
	}
	gen := flag >= 80
	if gen {
		flag -= 80
	}
	switch {
	case gen && flag <= 40:
		return fmt.Sprintf("has the flag %d", flag+80)
	case !gen && flag != 0 && flag%10 != 2:
		if nevbuf > 0 || flag > 40 {
			w.b = whole() // the counted arrays follow the header
		}
		end = len(w.b)
		if nevbuf > 0 {
			n := w.count(end, 4, "the entry offsets")
			w.skip(4*n, end)
		}
		if flag > 40 {
			n := w.count(end, 4, "the displacements")
			w.skip(4*n, end)
		}
		if w.why != "" {
			return w.why
		}
	}
	if flag == 1 || flag > 10 {
		if vers <= 1 {
			return "has a version without a data size"
		}
		if last < 0 || last > nbytes {
			return fmt.Sprintf("says its data end at byte %d of %d", last, nbytes)
		}
	}
	return ""
}

// checkKeyList checks the key list of the top directory, whose record
// starts at byte dir: its size and place, its key header, and the number
// of keys it declares against its length (each key takes at least 29
// bytes: ROOT's key header with three empty strings).
func checkKeyList(r io.ReaderAt, dir, size int64) error {
	var d [42]byte
	n, _ := r.ReadAt(d[:], dir)
	if n < 18 {
		return fmt.Errorf("damaged ROOT file: the top directory at byte %d is cut short", dir)
	}
	be := binary.BigEndian
	nbyteskeys := int64(int32(be.Uint32(d[10:])))
	seekkeys := int64(int32(be.Uint32(d[26:])))
	if int16(be.Uint16(d[:])) > 1000 {
		if n < 42 {
			return fmt.Errorf("damaged ROOT file: the top directory at byte %d is cut short", dir)
		}
		seekkeys = int64(be.Uint64(d[34:]))
	}
	if seekkeys <= 0 {
		return nil
	}
	if nbyteskeys < 0 || seekkeys > size || nbyteskeys > size-seekkeys {
		return fmt.Errorf("damaged ROOT file: the key list of %d bytes at byte %d lies outside the file of %d bytes", nbyteskeys, seekkeys, size)
	}
	k, why := readKey(r, seekkeys, size)
	if why == "" && k.objlen > size-seekkeys-k.keylen {
		why = fmt.Sprintf("declares %d bytes, more than the file holds", k.objlen)
	}
	if why == "" && k.objlen >= 4 && k.objlen == k.nbytes-k.keylen {
		list := make([]byte, k.objlen)
		if _, err := r.ReadAt(list, seekkeys+k.keylen); err != nil && err != io.EOF {
			return fmt.Errorf("damaged ROOT file: the key list at byte %d: %v", seekkeys, err)
		}
		if nkeys := int64(int32(be.Uint32(list))); nkeys < 0 || nkeys > k.objlen/29 {
			why = fmt.Sprintf("declares %d keys in %d bytes", nkeys, k.objlen)
		} else if why, err := checkKeys(r, list[4:], nkeys, size); err != nil || why != "" {
			if err != nil {
				return err
			}
			return fmt.Errorf("damaged ROOT file: the key list at byte %d %s", seekkeys, why)
		}
	}
	if why != "" {
		return fmt.Errorf("damaged ROOT file: the key list at byte %d %s", seekkeys, why)
	}
	return nil
}

// checkKeys checks the n keys of a key list (each a key header, the copy
// of its record's own): the strings of each lie inside it, and its sizes
// are those of the record it points to, which is checked as a record of
// the key's class (go-hep reads a record with the sizes and the class of
// its key in the list). It returns what is wrong with the list, or an
// error for a damaged record.
func checkKeys(r io.ReaderAt, list []byte, n, size int64) (string, error) {
	be := binary.BigEndian
	for i := range n {
		if len(list) < 26 {
			return fmt.Sprintf("is cut short at key %d of %d", i+1, n), nil
		}
		if int32(be.Uint32(list)) < 0 { // a gap: go-hep reads its length alone
			list = list[4:]
			continue
		}
		k, why := parseKey(list, size)
		if why == "" && k.keylen > int64(len(list)) {
			why = fmt.Sprintf("has a key of %d bytes where %d remain", k.keylen, len(list))
		}
		if why == "" {
			why = keyStrings(&k, list[:k.keylen])
		}
		if why != "" {
			return fmt.Sprintf("has a damaged key %d of %d: it %s", i+1, n, why), nil
		}
		seek := int64(int32(be.Uint32(list[18:])))
		if int16(be.Uint16(list[4:])) > 1000 {
			seek = int64(be.Uint64(list[18:]))
		}
		if seek < 0 || seek > size {
			return fmt.Sprintf("has a key %d of %d (%s %q) pointing to byte %d, outside the file", i+1, n, k.class, k.name, seek), nil
		}
		rec, why := readKey(r, seek, size)
		if why == "" && (rec.nbytes != k.nbytes || rec.objlen != k.objlen || rec.keylen != k.keylen) {
			why = fmt.Sprintf("has %d, %d and %d bytes (record, object, key), the key list %d, %d and %d", rec.nbytes, rec.objlen, rec.keylen, k.nbytes, k.objlen, k.keylen)
		}
		if why != "" {
			return fmt.Sprintf("has a key %d of %d (%s %q) whose record at byte %d %s", i+1, n, k.class, k.name, seek, why), nil
		}
		if _, err := checkRecord(r, "record", seek, size, k.class, nil); err != nil {
			return "", err
		}
		list = list[k.keylen:]
	}
	return "", nil
}

// rootKey is the part of a ROOT key header that the checks use.
type rootKey struct {
	nbytes, objlen, keylen int64
	class, name            string
}

// readKey decodes the key header at pos of a record that must end by
// byte end; it returns what is wrong, or "". The key's class, name and
// title must lie inside the key's length (go-hep allocates a string's
// declared length before reading it).
func readKey(r io.ReaderAt, pos, end int64) (rootKey, string) {
	var head [26]byte
	if n, _ := r.ReadAt(head[:], pos); n < 26 {
		return rootKey{}, "is cut short"
	}
	k, why := parseKey(head[:], end-pos)
	if why != "" {
		return k, why
	}
	b := make([]byte, k.keylen)
	if n, _ := r.ReadAt(b, pos); int64(n) < k.keylen {
		return k, "is cut short"
	}
	return k, keyStrings(&k, b)
}

// parseKey decodes the sizes of the key header at the start of b, whose
// record must fit in room bytes (ROOT file format, common practice:
// fNbytes, fVersion, fObjlen, fDatime, fKeylen, fCycle, then the
// positions, 32-bit up to version 1000, and three strings).
func parseKey(b []byte, room int64) (rootKey, string) {
	be := binary.BigEndian
	k := rootKey{
		nbytes: int64(int32(be.Uint32(b[:]))),
		objlen: int64(int32(be.Uint32(b[6:]))),
		keylen: int64(int16(be.Uint16(b[14:]))),
	}
	if k.nbytes < 26 || k.nbytes > room {
		return k, fmt.Sprintf("of %d bytes does not fit", k.nbytes)
	}
	if k.keylen < 26 || k.keylen > k.nbytes || k.objlen < 0 {
		return k, fmt.Sprintf("has a key of %d bytes and an object of %d in %d bytes", k.keylen, k.objlen, k.nbytes)
	}
	return k, ""
}

// keyStrings decodes the class and name of the key header b (the whole
// key, of k.keylen bytes), and checks that they and the title lie inside
// it.
func keyStrings(k *rootKey, b []byte) string {
	s := 26
	if int16(binary.BigEndian.Uint16(b[4:])) > 1000 {
		s = 34
	}
	var ok1, ok2, ok3 bool
	k.class, s, ok1 = tstring(b, s)
	k.name, s, ok2 = tstring(b, s)
	_, _, ok3 = tstring(b, s)
	if !ok1 || !ok2 || !ok3 {
		return fmt.Sprintf("has a class, name and title longer than its key of %d bytes", len(b))
	}
	return ""
}

// checkRecord checks the record at pos, called what in messages, which
// must end by byte end: its key header, for a compressed payload its
// blocks (with their checksums for a basket), and the objects of a
// record of a walked class: class, or the key's own class if "". It
// returns the record's size.
func checkRecord(r io.ReaderAt, what string, pos, end int64, class string, baskets *[]basketRef) (int64, error) {
	k, bad := readKey(r, pos, end)
	if bad != "" {
		return k.nbytes, fmt.Errorf("damaged ROOT file: the %s at byte %d %s", what, pos, bad)
	}
	if class != "" {
		k.class = class
	}
	walk := walkedClasses[k.class] && k.objlen <= maxWalked
	compressed := k.objlen != k.nbytes-k.keylen
	if !compressed && !walk {
		return k.nbytes, nil
	}
	payload := make([]byte, k.nbytes-k.keylen)
	if _, err := r.ReadAt(payload, pos+k.keylen); err != nil && err != io.EOF {
		return k.nbytes, fmt.Errorf("damaged ROOT file: the %s at byte %d: %v", what, pos, err)
	}
	basket := k.class == "TBasket"
	var why string
	if compressed {
		var total int64
		total, why = checkBlocks(payload, basket)
		if why == "" && total != k.objlen {
			why = fmt.Sprintf("declares %d bytes but its blocks hold %d", k.objlen, total)
		}
		if why == "" && walk {
			var ok bool
			if payload, ok, why = inflate(payload, k.objlen); !ok {
				walk = false
			}
		}
	}
	if why == "" && walk {
		w := walker{b: payload, base: k.keylen, refs: map[int64]string{}, objs: map[int64]bool{}}
		w.body(k.class, len(payload))
		if baskets != nil {
			*baskets = append(*baskets, w.baskets...)
		}
		if w.why != "" {
			return k.nbytes, fmt.Errorf("damaged ROOT file: the %s at byte %d (%s %q) is damaged, %s; the file cannot be read: write it again or restore it from a copy", what, pos, k.class, k.name, w.why)
		}
	}
	switch {
	case why == "":
		return k.nbytes, nil
	case basket:
		return k.nbytes, fmt.Errorf("branch %q: the basket at byte %d is damaged (%s)", k.name, pos, why)
	}
	return k.nbytes, fmt.Errorf("damaged ROOT file: the %s at byte %d (%s %q) is damaged (%s)", what, pos, k.class, k.name, why)
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

// checkBlocks checks the compressed blocks of a payload, each a 9-byte
// header (algorithm, method, compressed and uncompressed sizes of 3 bytes
// little-endian) then the block: they must tile the payload, and no
// block may expand beyond what its algorithm can (zlib: 1032:1, Adler
// 1995; LZ4: 255:1, the block format's longest match per byte). With sums,
// the LZ4 blocks' XXH64 and the zlib blocks' Adler-32 are verified too.
// It returns the uncompressed size and what is wrong, or "".
func checkBlocks(p []byte, sums bool) (int64, string) {
	var total int64
	for len(p) > 0 {
		if len(p) < 9 {
			return total, "a block header cut short"
		}
		src := int(p[3]) | int(p[4])<<8 | int(p[5])<<16
		tgt := int(p[6]) | int(p[7])<<8 | int(p[8])<<16
		if 9+src > len(p) {
			return total, "a block longer than the record"
		}
		block := p[9 : 9+src]
		total += int64(tgt)
		switch string(p[:2]) {
		case "L4":
			if sums && (len(block) < 8 || binary.BigEndian.Uint64(block) != xxHash64.Checksum(block[8:], 0)) {
				return total, "LZ4 block checksum mismatch"
			}
			if tgt > 255*src+64 {
				return total, fmt.Sprintf("an LZ4 block of %d bytes said to expand to %d", src, tgt)
			}
		case "ZL":
			if tgt > 1032*src+64 {
				return total, fmt.Sprintf("a zlib block of %d bytes said to expand to %d", src, tgt)
			}
			if !sums {
				break
			}
			zr, err := zlib.NewReader(bytes.NewReader(block))
			if err != nil {
				return total, "zlib block: " + err.Error()
			}
			got, err := io.Copy(io.Discard, zr)
			if err != nil {
				return total, "zlib block: " + err.Error()
			}
			if got != int64(tgt) {
				return total, fmt.Sprintf("zlib block of %d bytes, want %d", got, tgt)
			}
		}
		p = p[9+src:]
	}
	return total, ""
}
