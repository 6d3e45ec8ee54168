package rootio

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"fmt"
	"io"

	"github.com/klauspost/compress/zstd"
	"github.com/pierrec/lz4/v4"
	"github.com/ulikunitz/xz"
)

// The constants of ROOT's object streaming (ROOT reference guide,
// TBufferFile; from memory): a byte count carries kByteCountMask, an
// object pointer is a byte count, then kNewClassTag and the class name,
// or a reference to an earlier class carrying kClassMask (its position
// in the record plus kMapOffset), and a TObject with kIsReferenced set
// in its bits carries two more bytes.
const (
	byteCountMask  = 0x40000000
	newClassTag    = 0xffffffff
	classMask      = 0x80000000
	mapOffset      = 2
	isReferenced   = 1 << 4
	byteCountVMask = 0x4000
)

// Limits of the walk over a record's objects: the uncompressed size of a
// record whose objects are walked (larger records are left to go-hep,
// which reads them in one allocation of that size: a ROOT object's
// description never comes near it), and how deeply objects may nest
// (ROOT's own descriptions nest a few levels; go-hep recurses once per
// level).
const (
	maxWalked = 256 << 20
	maxDepth  = 100
)

// walkedClasses are the classes of the records whose objects are walked
// before go-hep decodes them: the streamer information (a TList of
// TStreamerInfo), trees and histograms.
var walkedClasses = map[string]bool{
	"TList": true, "TTree": true,
	"TH1D": true, "TH1F": true, "TH1I": true, "TH2D": true, "TH2F": true, "TH2I": true,
}

// inflate returns the uncompressed payload of a record of objlen bytes
// whose payload p consists of compressed blocks (checkBlocks has checked
// their headers), or ok false for an algorithm it cannot decompress. Each
// block must decompress to exactly the size its header declares; what is
// wrong is returned as why.
func inflate(p []byte, objlen int64) (out []byte, ok bool, why string) {
	out = make([]byte, 0, objlen)
	for len(p) >= 9 {
		src := int(p[3]) | int(p[4])<<8 | int(p[5])<<16
		tgt := int(p[6]) | int(p[7])<<8 | int(p[8])<<16
		block := p[9 : 9+src]
		dst := out[len(out) : len(out)+tgt]
		var err error
		switch string(p[:2]) {
		case "ZL":
			err = readExactly(dst, func() (io.Reader, error) { return zlib.NewReader(bytes.NewReader(block)) })
		case "XZ":
			err = readExactly(dst, func() (io.Reader, error) { return xz.NewReader(bytes.NewReader(block)) })
		case "ZS":
			err = readExactly(dst, func() (io.Reader, error) {
				return zstd.NewReader(bytes.NewReader(block), zstd.WithDecoderConcurrency(1),
					zstd.WithDecoderMaxMemory(uint64(tgt)+1), zstd.WithDecoderLowmem(true))
			})
		case "L4":
			if len(block) < 8 {
				return nil, true, "an LZ4 block cut short"
			}
			var n int
			n, err = lz4.UncompressBlock(block[8:], dst)
			if err == nil && n != tgt {
				err = fmt.Errorf("%d bytes, want %d", n, tgt)
			}
		default:
			return nil, false, ""
		}
		if err != nil {
			return nil, true, fmt.Sprintf("a %s block does not decompress (%v)", p[:2], err)
		}
		out = out[:len(out)+tgt]
		p = p[9+src:]
	}
	return out, true, ""
}

// readExactly fills dst from the reader open returns and checks that
// nothing follows.
func readExactly(dst []byte, open func() (io.Reader, error)) error {
	rd, err := open()
	if err != nil {
		return err
	}
	if c, ok := rd.(interface{ Close() }); ok {
		defer c.Close()
	}
	if _, err := io.ReadFull(rd, dst); err != nil {
		return err
	}
	// Read on to the end, where zlib and xz verify their checksums.
	var one [1]byte
	n, err := rd.Read(one[:])
	for i := 0; n == 0 && err == nil && i < 100; i++ {
		n, err = rd.Read(one[:])
	}
	switch {
	case n > 0:
		return fmt.Errorf("more than %d bytes", len(dst))
	case err != io.EOF:
		return err
	}
	return nil
}

// walker follows the objects of a record's uncompressed payload as go-hep
// v0.36.0 decodes them, and checks every count and length they declare
// against the bytes that remain before go-hep allocates it (go-hep
// allocates first: a TObjArray's object count, a TString's length, a
// TBranch's basket arrays). Byte counts (ROOT file format, common
// practice: every object and base class is preceded by its length with
// kByteCountMask set, then its version) bound each object; the walk stops
// silently where it cannot follow the layout (an unknown class or
// version), leaving the rest to go-hep.
type walker struct {
	b    []byte
	pos  int
	base int64            // the position of b[0] in go-hep's numbering (the key's length)
	refs map[int64]string // classes by their tag
	objs map[int64]bool   // the tags of the objects read
	// baskets are the baskets the branches walked point to.
	baskets []basketRef
	depth   int
	why     string // what is wrong; stops the walk
	stop    bool   // the layout cannot be followed; stops the walk
}

// basketRef is where a branch says one of its baskets is.
type basketRef struct{ seek, bytes int64 }

func (w *walker) done() bool { return w.why != "" || w.stop }

// fail records what is wrong at the current position.
func (w *walker) fail(format string, args ...any) {
	if w.why == "" {
		w.why = fmt.Sprintf("at byte %d of its object: ", w.pos) + fmt.Sprintf(format, args...)
	}
}

// need reports whether n bytes remain before end, recording the damage
// otherwise.
func (w *walker) need(n int64, end int, what string) bool {
	if w.done() {
		return false
	}
	if n < 0 || n > int64(end-w.pos) {
		w.fail("%s needs %d bytes, but %d remain", what, n, end-w.pos)
		return false
	}
	return true
}

func (w *walker) u16(end int) uint16 {
	if !w.need(2, end, "a 2-byte field") {
		return 0
	}
	v := binary.BigEndian.Uint16(w.b[w.pos:])
	w.pos += 2
	return v
}

func (w *walker) u32(end int) uint32 {
	if !w.need(4, end, "a 4-byte field") {
		return 0
	}
	v := binary.BigEndian.Uint32(w.b[w.pos:])
	w.pos += 4
	return v
}

func (w *walker) skip(n int, end int) {
	if w.need(int64(n), end, "a field") {
		w.pos += n
	}
}

// header reads an object's byte count and version; it returns the end of
// the object, which must lie before end. Without a byte count (old
// files) the walk stops.
func (w *walker) header(end int) (vers int, objEnd int) {
	if !w.need(6, end, "an object header") {
		return 0, end
	}
	bc := binary.BigEndian.Uint32(w.b[w.pos:])
	if bc&byteCountMask == 0 {
		w.stop = true
		return 0, end
	}
	n := int64(bc &^ byteCountMask)
	w.pos += 4
	if n < 2 || n > int64(end-w.pos) {
		w.fail("an object of %d bytes, but %d remain", n, end-w.pos)
		return 0, end
	}
	objEnd = w.pos + int(n)
	v := int16(w.u16(objEnd))
	return int(v &^ 0x4000), objEnd
}

// close checks that an object walked field by field ends where its byte
// count says, as go-hep checks after decoding it.
func (w *walker) close(end int) {
	if !w.done() && w.pos != end {
		w.fail("an object's fields end %d bytes before its length", end-w.pos)
	}
	w.pos = end
}

// skipObject steps over an object whose fields go-hep reads without
// allocating (the line, fill and marker attributes, the I/O features).
func (w *walker) skipObject(end int) {
	_, e := w.header(end)
	if !w.done() {
		w.pos = e
	}
}

// str checks a TString: one length byte (255: a 4-byte length follows),
// then the bytes.
func (w *walker) str(end int) {
	if !w.need(1, end, "a string") {
		return
	}
	n := int64(w.b[w.pos])
	w.pos++
	if n == 255 {
		n = int64(w.u32(end))
	}
	if w.need(n, end, "a string") {
		w.pos += int(n)
	}
}

// count reads a count of items of at least size bytes each.
func (w *walker) count(end int, size int64, what string) int {
	n := int64(int32(w.u32(end)))
	if w.done() {
		return 0
	}
	if n < 0 || n*size > int64(end-w.pos) {
		w.fail("%s declares %d items of at least %d bytes each, but %d bytes remain", what, n, size, end-w.pos)
		return 0
	}
	return int(n)
}

// tobject checks a TObject: its version (with two more fields when it
// carries a byte count flag), unique ID, bits, and the process ID of a
// referenced object.
func (w *walker) tobject(end int) {
	if v := w.u16(end); v&byteCountVMask != 0 {
		w.skip(4, end)
	}
	w.skip(4, end)
	if bits := w.u32(end); bits&isReferenced != 0 {
		w.skip(2, end)
	}
}

// named checks a TNamed: a TObject, a name and a title.
func (w *walker) named(end int) {
	_, e := w.header(end)
	w.tobject(e)
	w.str(e)
	w.str(e)
	w.close(e)
}

// array checks a TObjArray.
func (w *walker) array(end int) {
	vers, e := w.header(end)
	if vers > 2 {
		w.tobject(e)
	}
	if vers > 1 {
		w.str(e)
	}
	n := w.count(e, 4, "a TObjArray") // a null object pointer takes 4 bytes
	w.skip(4, e)
	for range n {
		if w.done() {
			return
		}
		w.object(e)
	}
	w.close(e)
}

// list checks a TList (or THashList).
func (w *walker) list(end int) {
	vers, e := w.header(end)
	if vers <= 3 {
		w.stop = true
		return
	}
	w.tobject(e)
	w.str(e)
	n := w.count(e, 5, "a TList") // a null pointer and an empty option
	for range n {
		if w.done() {
			return
		}
		w.object(e)
		w.str(e)
	}
	w.close(e)
}

// object checks an object pointer, as go-hep's ReadObjectAny reads it,
// and the object it introduces.
func (w *walker) object(end int) {
	if w.done() {
		return
	}
	w.depth++
	defer func() { w.depth-- }()
	if w.depth > maxDepth {
		w.fail("objects nested more than %d deep", maxDepth)
		return
	}
	beg := w.pos
	bc := w.u32(end)
	switch {
	case w.done() || bc == 0:
		return // a null pointer
	case bc&byteCountMask == 0 && bc&classMask == 0:
		return // a reference to an earlier object
	case bc&byteCountMask == 0 || bc == newClassTag:
		w.stop = true // an old layout without byte count
		return
	}
	n := int64(bc &^ byteCountMask)
	if n < 4 || n > int64(end-w.pos) {
		w.fail("an object of %d bytes, but %d remain", n, end-w.pos)
		return
	}
	objEnd := w.pos + int(n)
	start := w.pos
	tag := w.u32(objEnd)
	var class string
	switch {
	case tag&classMask == 0:
		// A reference to an earlier object: go-hep reads on after the
		// tag when it knows the object, whatever the byte count says,
		// and jumps beyond the record when it does not.
		if !w.objs[int64(tag)] {
			w.stop = true
		}
		return
	case tag == newClassTag:
		i := bytes.IndexByte(w.b[w.pos:min(objEnd, w.pos+80)], 0)
		if i < 0 {
			w.stop = true
			return
		}
		class = string(w.b[w.pos : w.pos+i])
		w.pos += i + 1
		w.refs[w.base+int64(start)+mapOffset] = class
	default:
		var ok bool
		if class, ok = w.refs[int64(tag&^classMask)]; !ok {
			w.stop = true
			return
		}
	}
	w.body(class, objEnd)
	if !w.done() {
		// go-hep reads on where the object's fields end, not where
		// the pointer's byte count says.
		if w.pos != objEnd {
			w.fail("a %s pointer's byte count ends %d bytes after its fields", class, objEnd-w.pos)
			return
		}
		w.objs[w.base+int64(beg)+mapOffset] = true
	}
}

// body checks an object of the class, from its header to end.
func (w *walker) body(class string, end int) {
	switch class {
	case "TList", "THashList":
		w.list(end)
	case "TObjArray":
		w.array(end)
	case "TNamed":
		w.named(end)
	case "TStreamerInfo":
		w.streamerInfo(end)
	case "TStreamerBase", "TStreamerBasicType", "TStreamerObject", "TStreamerObjectPointer",
		"TStreamerObjectAny", "TStreamerObjectAnyPointer", "TStreamerString", "TStreamerSTL",
		"TStreamerSTLstring", "TStreamerArtificial":
		_, e := w.header(end)
		w.element(e)
		if !w.done() {
			w.pos = e
		}
	case "TStreamerBasicPointer", "TStreamerLoop":
		_, e := w.header(end)
		w.element(e)
		w.skip(4, e)
		w.str(e)
		w.str(e)
		w.close(e)
	case "TArrayD", "TArrayL64":
		w.counted(end, 8, "a "+class)
	case "TArrayI", "TArrayF":
		w.counted(end, 4, "a "+class)
	case "TTree":
		w.tree(end)
	case "TBranch":
		w.branch(end)
	case "TLeafD", "TLeafF", "TLeafI", "TLeafL", "TLeafS", "TLeafB", "TLeafO", "TLeafC", "TLeafElement",
		"TLeafF16", "TLeafD32", "TLeafG":
		_, e := w.header(end)
		w.leaf(e)
		if !w.done() {
			w.pos = e
		}
	case "TH1D", "TH2D":
		w.hist(end, class[2] == '2', 8)
	case "TH1F", "TH1I", "TH2F", "TH2I":
		w.hist(end, class[2] == '2', 4)
	default:
		w.stop = true
	}
}

// streamerInfo checks a TStreamerInfo: a TNamed, the checksum and class
// version, and the TObjArray of its elements.
func (w *walker) streamerInfo(end int) {
	_, e := w.header(end)
	w.named(e)
	w.skip(8, e)
	w.object(e)
	w.close(e)
}

// element checks the TStreamerElement part of an element: a TNamed,
// type, size, array length and dimension, the maximal indices (version
// 1: a counted array) and the type name.
func (w *walker) element(end int) {
	vers, e := w.header(end)
	w.named(e)
	w.skip(16, e)
	if vers == 1 {
		n := w.count(e, 4, "the maximal indices of a TStreamerElement")
		w.skip(4*n, e)
	} else {
		w.skip(20, e)
	}
	w.str(e)
	if vers == 3 {
		w.skip(24, e)
	}
	w.close(e)
}

// tree checks a TTree of version 16 to 20 (ROOT 5.30 and later) as
// go-hep reads it, up to its branches and leaves: the count of the
// cluster ranges, and the two TObjArrays.
func (w *walker) tree(end int) {
	vers, e := w.header(end)
	if w.done() || vers < 16 || vers > 20 {
		w.stop = true
		return
	}
	w.named(e)
	w.skipObject(e) // line attributes
	w.skipObject(e) // fill attributes
	w.skipObject(e) // marker attributes
	w.skip(4*8, e)  // entries, total, compressed and saved bytes
	if vers >= 18 {
		w.skip(8, e) // flushed bytes
	}
	w.skip(8+3*4, e) // weight, timer interval, scan field, update
	if vers >= 17 {
		w.skip(4, e) // default entry offset length
	}
	nclus := 0
	if vers >= 19 {
		nclus = w.count(e, 16, "the cluster ranges of a TTree")
	}
	w.skip(4*8, e) // maximal entries, entry loop, virtual size, autosave
	if vers >= 18 {
		w.skip(8, e) // autoflush
	}
	w.skip(8, e) // estimate
	if vers >= 19 {
		w.skip(1+8*nclus+1+8*nclus, e) // range ends and sizes
	}
	if vers >= 20 {
		w.skipObject(e) // I/O features
	}
	w.array(e) // branches
	w.array(e) // leaves
	for range 7 {
		w.object(e) // aliases, index values, index, tree index, friends, user information, branch references
	}
	w.close(e)
}

// branch checks a TBranch of version 10 to 13 as go-hep reads it: a
// TNamed, its sub-branches, leaves and baskets, the three basket arrays
// of the declared maximal number of baskets, and the file name.
func (w *walker) branch(end int) {
	vers, e := w.header(end)
	if w.done() || vers < 10 || vers > 13 {
		w.stop = true
		return
	}
	w.named(e)
	w.skipObject(e) // fill attributes
	w.skip(3*4, e)  // compression, basket size, entry offset length
	written := int64(int32(w.u32(e)))
	w.skip(8, e) // entry number
	if vers >= 13 {
		w.skipObject(e) // I/O features
	}
	w.skip(4, e)
	maxBaskets := int64(int32(w.u32(e)))
	w.skip(4+8, e)
	if vers >= 11 {
		w.skip(8, e)
	}
	w.skip(16, e)
	w.array(e)
	w.array(e)
	w.array(e)
	if w.done() {
		return
	}
	if maxBaskets < 0 || 3+20*maxBaskets > int64(e-w.pos) {
		w.fail("a TBranch declares %d baskets (4+8+8 bytes each), but %d bytes remain", maxBaskets, e-w.pos)
		return
	}
	// go-hep reads the written baskets at the places and with the sizes
	// these arrays give, in goroutines of its own where a panic cannot be
	// recovered: they are kept to be checked against the file's records.
	if written >= 0 && written <= maxBaskets {
		bytesAt, seekAt := w.pos+1, w.pos+1+4*int(maxBaskets)+1+8*int(maxBaskets)+1
		for i := range int(written) {
			w.baskets = append(w.baskets, basketRef{
				seek:  int64(binary.BigEndian.Uint64(w.b[seekAt+8*i:])),
				bytes: int64(int32(binary.BigEndian.Uint32(w.b[bytesAt+4*i:]))),
			})
		}
	}
	w.pos += 3 + 20*int(maxBaskets)
	w.str(e)
	w.close(e)
}

// leaf checks the TLeaf part of a leaf: a TNamed, four fields and the
// pointer to its count leaf.
func (w *walker) leaf(end int) {
	_, e := w.header(end)
	w.named(e)
	w.skip(4*3+2, e)
	w.object(e)
	w.close(e)
}

// hist checks a TH1 or TH2 histogram whose cells take size bytes each,
// as go-hep reads it: the TH1 part (for a TH2 inside the TH2 part),
// then the cells' counted array.
func (w *walker) hist(end int, twoD bool, size int64) {
	_, e := w.header(end)
	if twoD {
		vers, e2 := w.header(e)
		if vers < 3 {
			w.stop = true
			return
		}
		w.th1(e2)
		w.skip(4*8, e2) // scale factor, sums of w y, w y², w x y
		w.close(e2)
	} else {
		w.th1(e)
	}
	w.counted(e, size, "the cells of a histogram")
	w.close(e)
}

// counted checks a TArray: a count, then the values of size bytes each.
func (w *walker) counted(end int, size int64, what string) {
	n := w.count(end, size, what)
	w.skip(n*int(size), end)
}

// th1 checks the TH1 part of a histogram of version 2 to 8 (ROOT 3 and
// later): a TNamed, the attributes, the three axes, the contour levels,
// the sums of squared weights, the option string, the list of functions
// and the buffer, all counted arrays go-hep allocates first.
func (w *walker) th1(end int) {
	vers, e := w.header(end)
	if w.done() || vers < 2 || vers > 8 {
		w.stop = true
		return
	}
	w.named(e)
	w.skipObject(e) // line attributes
	w.skipObject(e) // fill attributes
	w.skipObject(e) // marker attributes
	w.skip(4, e)    // number of cells
	w.axis(e)
	w.axis(e)
	w.axis(e)
	w.skip(2*2+5*8+3*8, e) // bar offset and width, entries and sums, maximum, minimum, normalisation
	w.counted(e, 8, "the contour levels of a histogram")
	w.counted(e, 8, "the sums of squared weights of a histogram")
	w.str(e)
	w.list(e)
	if vers > 3 {
		n := w.count(e, 8, "the buffer of a histogram")
		w.skip(1+8*n, e)
		if vers > 6 {
			w.skip(4, e)
		}
		if vers > 7 {
			w.skip(4, e)
		}
	}
	w.close(e)
}

// axis checks a TAxis of version 6 to 10: a TNamed, the axis attributes,
// the number of bins and range, the counted bin edges, the first and
// last bins, the time format string and the lists of labels.
func (w *walker) axis(end int) {
	vers, e := w.header(end)
	if w.done() || vers < 6 || vers > 10 {
		w.stop = true
		return
	}
	w.named(e)
	w.skipObject(e) // axis attributes
	w.skip(4+2*8, e)
	w.counted(e, 8, "the bin edges of an axis")
	w.skip(2*4, e)
	if vers >= 9 {
		w.skip(2, e)
	}
	w.skip(1, e)
	w.str(e)
	if vers >= 9 {
		w.object(e)
	}
	if vers >= 10 {
		w.object(e)
	}
	w.close(e)
}
