package rootio

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"fmt"
	"os"
	"strings"
	"testing"

	"github.com/klauspost/compress/zstd"
	"github.com/pierrec/lz4/v4"
	"github.com/pierrec/xxHash/xxHash64"
	"github.com/ulikunitz/xz"
)

// walkRecords walks the objects of every record of a walked class in the
// ROOT file data, from the first record to the end (ROOT file format,
// common practice: records follow one another from fBEGIN to fEND, each a
// key header then the payload), and returns the walkers by the records'
// classes.
func walkRecords(t *testing.T, data []byte) map[string][]*walker {
	t.Helper()
	be := binary.BigEndian
	smallLayout(t, data)
	begin, end := int64(be.Uint32(data[8:])), int64(be.Uint32(data[12:]))
	r := bytes.NewReader(data)
	got := map[string][]*walker{}
	for pos := begin; pos < end; {
		nbytes := int64(int32(be.Uint32(data[pos:])))
		if nbytes < 0 {
			pos -= nbytes
			continue
		}
		k, why := readKey(r, pos, end)
		if why != "" {
			t.Fatalf("record at %d: %s", pos, why)
		}
		if walkedClasses[k.class] {
			p := data[pos+k.keylen : pos+k.nbytes]
			if k.objlen != k.nbytes-k.keylen {
				var ok bool
				if p, ok, why = inflate(p, k.objlen); !ok || why != "" {
					t.Fatalf("record at %d (%s): not inflated: %s", pos, k.class, why)
				}
			}
			w := &walker{b: p, base: k.keylen, refs: map[int64]string{}, objs: map[int64]bool{}}
			w.body(k.class, len(p))
			got[k.class] = append(got[k.class], w)
		}
		pos += nbytes
	}
	return got
}

// TestWalkFollowsWrittenFiles walks the streamer information and the
// trees of files written by go-hep's writer (the seed files of the fuzz
// targets): the walk must follow every object to the end of its record
// (ROOT's byte counts, ROOT file format, common practice: each object
// ends where its byte count says) without stopping at a layout it does
// not know, or the checks would not reach the counts they are for.
func TestWalkFollowsWrittenFiles(t *testing.T) {
	for _, c := range []struct {
		path    string
		classes []string
	}{
		{"testdata/hists.root", []string{"TList", "TH1D", "TH2D"}},
		{"../../inputs/events/testdata/events.root", []string{"TList", "TTree"}},
	} {
		data, err := os.ReadFile(c.path)
		if err != nil {
			t.Fatal(err)
		}
		got := walkRecords(t, data)
		for _, class := range c.classes {
			if len(got[class]) == 0 {
				t.Errorf("%s: no %s record walked", c.path, class)
			}
			for _, w := range got[class] {
				if w.why != "" || w.stop || w.pos != len(w.b) {
					t.Errorf("%s: %s record: stopped at byte %d of %d (%q, stop %v)", c.path, class, w.pos, len(w.b), w.why, w.stop)
				}
			}
		}
	}
}

// rootBlock frames one compressed block as ROOT does (ROOT file format,
// common practice): two letters naming the algorithm, a method byte,
// then the compressed and uncompressed sizes in 3 bytes each,
// little-endian.
func rootBlock(alg string, comp []byte, n int) []byte {
	c := len(comp)
	h := []byte{alg[0], alg[1], 8, byte(c), byte(c >> 8), byte(c >> 16), byte(n), byte(n >> 8), byte(n >> 16)}
	return append(h, comp...)
}

// TestInflate decompresses blocks of the four algorithms ROOT writes,
// compressed by the algorithms' own Go encoders (compress/zlib, the LZ4
// block format with ROOT's 8-byte XXH64 prefix, zstd and xz), back to the
// original bytes; a block declaring more bytes than it holds is
// refused.
func TestInflate(t *testing.T) {
	want := bytes.Repeat([]byte("zeton migration 0123456789 "), 300)
	n := len(want)
	var zl bytes.Buffer
	zw := zlib.NewWriter(&zl)
	zw.Write(want)
	zw.Close()
	l4 := make([]byte, lz4.CompressBlockBound(n))
	m, err := lz4.CompressBlock(want, l4, nil)
	if err != nil || m == 0 {
		t.Fatalf("lz4: %d, %v", m, err)
	}
	sum := make([]byte, 8)
	binary.BigEndian.PutUint64(sum, xxHash64.Checksum(l4[:m], 0))
	enc, _ := zstd.NewWriter(nil)
	zs := enc.EncodeAll(want, nil)
	var xzb bytes.Buffer
	xw, _ := xz.NewWriter(&xzb)
	xw.Write(want)
	xw.Close()
	for _, c := range []struct {
		alg  string
		comp []byte
	}{{"ZL", zl.Bytes()}, {"L4", append(sum, l4[:m]...)}, {"ZS", zs}, {"XZ", xzb.Bytes()}} {
		// Two blocks, the second a copy of the first.
		p := append(rootBlock(c.alg, c.comp, n), rootBlock(c.alg, c.comp, n)...)
		got, ok, why := inflate(p, int64(2*n))
		if !ok || why != "" || !bytes.Equal(got, append(append([]byte(nil), want...), want...)) {
			t.Errorf("%s: ok %v, %q, %d bytes", c.alg, ok, why, len(got))
		}
		if _, _, why := inflate(rootBlock(c.alg, c.comp, n+1), int64(n+1)); why == "" {
			t.Errorf("%s: a block said to hold one byte more is accepted", c.alg)
		}
	}
	if _, ok, _ := inflate(rootBlock("CS", zl.Bytes(), n), int64(n)); ok {
		t.Error("the old ROOT algorithm is said to be decompressed")
	}
}

// treeRecord returns the uncompressed payload and key length of the
// record of the tree "events" in the seed file of the event reader's
// fuzz target, and the offset of its first TBranch object (after its
// class name).
func treeRecord(t *testing.T) ([]byte, int64, int) {
	t.Helper()
	data, err := os.ReadFile("../../inputs/events/testdata/events.root")
	if err != nil {
		t.Fatal(err)
	}
	be := binary.BigEndian
	begin, end := int64(be.Uint32(data[8:])), int64(be.Uint32(data[12:]))
	r := bytes.NewReader(data)
	for pos := begin; pos < end; {
		k, why := readKey(r, pos, end)
		if why != "" {
			t.Fatal(why)
		}
		if k.class == "TTree" {
			p, ok, why := inflate(data[pos+k.keylen:pos+k.nbytes], k.objlen)
			if !ok || why != "" {
				t.Fatalf("tree record: %s", why)
			}
			i := bytes.Index(p, []byte("TBranch\x00"))
			if i < 0 {
				t.Fatal("no TBranch in the tree record")
			}
			return p, k.keylen, i + len("TBranch\x00")
		}
		pos += k.nbytes
	}
	t.Fatal("no tree record")
	return nil, 0, 0
}

// TestTreeCounts damages the first branch of a written tree, in the
// layout go-hep reads (ROOT's TBranch streamer, version 13: a TNamed
// after the byte count and version, the fill attributes, five counters,
// the I/O features, then fOffset and fMaxBaskets; from memory): its
// name's length set to 4 GB (go-hep v0.36.0 allocates a string's length
// before reading it), and its maximal number of baskets set to 100
// million (go-hep allocates the three basket arrays, 20 bytes per basket,
// before reading them). The walk refuses both, naming the count.
func TestTreeCounts(t *testing.T) {
	p, keylen, i := treeRecord(t)
	be := binary.BigEndian
	if v := be.Uint16(p[i+4:]); v != 13 {
		t.Fatalf("TBranch version %d; the offsets below are for version 13", v)
	}
	named := i + 6
	if be.Uint32(p[named+6+6:])&isReferenced != 0 {
		t.Fatal("a referenced TNamed; the offsets below are for an unreferenced one")
	}
	name := named + 6 + 10
	walk := func(p []byte) string {
		w := walker{b: p, base: keylen, refs: map[int64]string{}, objs: map[int64]bool{}}
		w.body("TTree", len(p))
		return w.why
	}

	q := append([]byte(nil), p...)
	q[name] = 255
	be.PutUint32(q[name+1:], 0xf0000000)
	if why := walk(q); !strings.Contains(why, "a string needs 4026531840 bytes") {
		t.Errorf("a branch name of 4 GB: %q", why)
	}

	j := name + 1 + int(p[name])
	j += 1 + int(p[j])                         // title
	j += 4 + int(be.Uint32(p[j:])&^0x40000000) // fill attributes
	j += 4*4 + 8                               // compression, basket size, entry offset length, write basket, entry number
	j += 4 + int(be.Uint32(p[j:])&^0x40000000) // I/O features
	j += 4                                     // offset
	if got := be.Uint32(p[j:]); got == 0 || got > 1000 {
		t.Fatalf("fMaxBaskets read as %d: the offsets are wrong", got)
	}
	q = append([]byte(nil), p...)
	be.PutUint32(q[j:], 100_000_000)
	if why := walk(q); !strings.Contains(why, "a TBranch declares 100000000 baskets") {
		t.Errorf("100 million baskets: %q", why)
	}
}

// TestHistCounts damages the count of the cells of the 1-D and 2-D
// histograms of a written file (a TArray: the count, then the values;
// ROOT's TH1D streamer, from memory), set to 500 million in records of a
// few hundred bytes (go-hep v0.36.0 allocates 4 GB for it before
// reading): the walk refuses it, naming the array.
func TestHistCounts(t *testing.T) {
	data, err := os.ReadFile("testdata/hists.root")
	if err != nil {
		t.Fatal(err)
	}
	got := walkRecords(t, data)
	for _, class := range []string{"TH1D", "TH2D"} {
		if len(got[class]) == 0 {
			t.Fatalf("no %s record", class)
		}
		p := got[class][0].b
		be := binary.BigEndian
		// The cells end the record: find the count n followed by n values.
		at := -1
		for n := 1; 8*n+4 <= len(p); n++ {
			if i := len(p) - 8*n - 4; int(be.Uint32(p[i:])) == n {
				at = i
				break
			}
		}
		if at < 0 {
			t.Fatalf("%s: no cell array at the end of the record", class)
		}
		q := append([]byte(nil), p...)
		be.PutUint32(q[at:], 500_000_000)
		w := walker{b: q, base: got[class][0].base, refs: map[int64]string{}, objs: map[int64]bool{}}
		w.body(class, len(q))
		if !strings.Contains(w.why, "the cells of a histogram declares 500000000 items of at least 8 bytes") {
			t.Errorf("%s with 500 million cells: %q", class, w.why)
		}
	}
}

// TestPointerByteCount lengthens by 12 bytes the byte count in front of
// an element of the streamer information of a written file (an object
// pointer: its length with kByteCountMask, then the class tag; ROOT
// reference guide, from memory). go-hep v0.36.0 does not use that count:
// it reads on where the element's fields end, so a walk that jumped to
// the end the count says would check other bytes than go-hep reads (a
// FuzzROOT finding: a TObjArray count of 1.9 billion behind such a
// pointer). The walk refuses the mismatch.
func TestPointerByteCount(t *testing.T) {
	data, err := os.ReadFile("testdata/hists.root")
	if err != nil {
		t.Fatal(err)
	}
	w := walkRecords(t, data)["TList"][0]
	p := append([]byte(nil), w.b...)
	// The first element pointer: after the TObjArray's class name come
	// its header (6 bytes), TObject (10), name (1 byte, empty), count
	// and lower bound (8).
	i := bytes.Index(p, []byte("TObjArray\x00")) + len("TObjArray\x00") + 6 + 10 + 1 + 8
	bc := binary.BigEndian.Uint32(p[i:])
	if bc&byteCountMask == 0 || p[i+4] != 0xff {
		t.Fatalf("no element pointer at byte %d: %x", i, p[i:i+8])
	}
	binary.BigEndian.PutUint32(p[i:], bc+12)
	v := walker{b: p, base: w.base, refs: map[int64]string{}, objs: map[int64]bool{}}
	v.body("TList", len(p))
	if !strings.Contains(v.why, "pointer's byte count ends 12 bytes after its fields") {
		t.Errorf("a pointer's byte count 12 bytes too long: %q", v.why)
	}
}

// TestBasketHeaders damages the first basket of a written tree: the end
// of its data (fLast, after the key's strings, the version, buffer size,
// entry size and number of entries; ROOT's TBasket streamer, from
// memory) set negative with the flag saying the data follow the header:
// go-hep v0.36.0 allocates it as a slice in a goroutine of its own (a
// panic that ends the process, a FuzzROOT finding). It is refused.
func TestBasketHeaders(t *testing.T) {
	data, err := os.ReadFile("../../inputs/events/testdata/events.root")
	if err != nil {
		t.Fatal(err)
	}
	be := binary.BigEndian
	begin, end := int64(be.Uint32(data[8:])), int64(be.Uint32(data[12:]))
	r := bytes.NewReader(data)
	var at int64 = -1
	var k rootKey
	for pos := begin; pos < end && at < 0; pos += k.nbytes {
		var why string
		if k, why = readKey(r, pos, end); why != "" {
			t.Fatal(why)
		}
		if k.class == "TBasket" {
			at = pos
		}
	}
	if at < 0 || be.Uint16(data[at+4:]) > 1000 {
		t.Fatal("no small-file TBasket record")
	}
	s := 26
	for range 3 {
		_, s, _ = tstring(data[at:at+k.keylen], s)
	}
	last := at + int64(s) + 2 + 4 + 4 + 4
	if got := int64(be.Uint32(data[last:])); got <= k.keylen || got > k.objlen+k.keylen {
		t.Fatalf("fLast read as %d: the offsets are wrong", got)
	}
	d := append([]byte(nil), data...)
	be.PutUint32(d[last:], 0xcccccccc)
	d[last+4] = 1               // the flag: the data follow the header, fLast bytes of them
	be.PutUint32(d[last-4:], 0) // no entries: no entry offsets before the data
	if err := CheckFile(bytes.NewReader(d), int64(len(d))); err == nil || !strings.Contains(err.Error(), fmt.Sprintf("the basket at byte %d is damaged (its header says its data end at byte -858993460", at)) {
		t.Errorf("fLast negative: %v", err)
	}
}
