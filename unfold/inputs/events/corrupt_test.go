package events

import (
	"bytes"
	"context"
	"encoding/binary"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/internal/eventfile"
)

// TestCorrupted flips random bytes of ROOT and Parquet files: opening and
// reading them must end in an error or in values, never in a panic (go-hep
// and parquet-go panic on some damaged input; the readers recover). Parquet
// pages carry CRC checksums, so every damaged Parquet file must be refused;
// ROOT baskets stored uncompressed have no checksum, so damage there can go
// unnoticed, which is the format's limit.
func TestCorrupted(t *testing.T) {
	dir := t.TempDir()
	names, cols := sampleColumns(20000)
	for _, file := range []string{"c.root", "c.parquet"} {
		p := filepath.Join(dir, file)
		if filepath.Ext(file) == ".root" {
			eventfile.WriteROOT(p, "events", names, cols)
		} else {
			eventfile.WriteParquet(p, names, cols)
		}
		data, _ := os.ReadFile(p)
		rng := rand.New(rand.NewPCG(1, 2))
		fails := 0
		for trial := range 60 {
			d := append([]byte(nil), data...)
			for range 1 + rng.IntN(20) {
				d[rng.IntN(len(d))] ^= byte(1 + rng.IntN(255))
			}
			q := filepath.Join(dir, fmt.Sprintf("x%d%s", trial, filepath.Ext(file)))
			os.WriteFile(q, d, 0o644)
			for _, w := range []int{1, 2} {
				src, err := Open(q, Options{Workers: w})
				if err == nil {
					err = src.Read(context.Background(), names, 1000, func(*Batch) error { return nil })
					src.Close()
				}
				if err != nil {
					fails++
				}
			}
			os.Remove(q)
		}
		t.Logf("%s: %d of 120 reads failed with an error", file, fails)
		if filepath.Ext(file) == ".parquet" && fails != 120 {
			t.Errorf("%d of 120 damaged Parquet reads succeeded", 120-fails)
		}
	}
}

// TestCorruptedROOTBasket overwrites 64 bytes at several places inside a
// ROOT file written with LZ4-compressed baskets: each damaged basket is
// refused when the file is opened, the error naming the file and the
// branch (ROOT's LZ4 blocks carry an XXH64 sum of the compressed bytes,
// common practice of the ROOT file format). The columns repeat values so
// that the baskets compress (the writer stores incompressible ones as
// they are, without a checksum).
func TestCorruptedROOTBasket(t *testing.T) {
	dir := t.TempDir()
	names := []string{"a", "b"}
	cols := [][]float64{make([]float64, 200000), make([]float64, 200000)}
	for k := range cols[0] {
		cols[0][k], cols[1][k] = float64(k%10), float64(k/1000)
	}
	p := filepath.Join(dir, "c.root")
	if err := eventfile.WriteROOT(p, "events", names, cols); err != nil {
		t.Fatal(err)
	}
	data, _ := os.ReadFile(p)
	for _, at := range []float64{0.2, 0.35, 0.5, 0.65, 0.8} {
		d := append([]byte(nil), data...)
		o := int(at * float64(len(d)))
		for i := o; i < o+64; i++ {
			d[i] ^= 0x5a
		}
		q := filepath.Join(dir, fmt.Sprintf("x%v.root", at))
		os.WriteFile(q, d, 0o644)
		src, err := Open(q, Options{})
		if err == nil {
			err = src.Read(context.Background(), names, 1000, func(*Batch) error { return nil })
			src.Close()
			t.Errorf("64 bytes damaged at %d of %d: read without error", o, len(d))
			continue
		}
		if !strings.Contains(err.Error(), q+": branch ") || !strings.Contains(err.Error(), "is damaged (LZ4 block checksum mismatch)") {
			t.Errorf("64 bytes damaged at %d: %v", o, err)
		}
	}
}

// TestParquetFooterLength gives the seed file a footer length (the four
// bytes before the trailing magic, Apache Parquet file format
// specification, "File Format") larger than the file: it is refused
// naming the file, without allocating the declared length (parquet-go
// v0.32.0 allocates it first: up to 4 GB for one mutated byte).
func TestParquetFooterLength(t *testing.T) {
	data, err := os.ReadFile("testdata/events.parquet")
	if err != nil {
		t.Fatal(err)
	}
	for _, n := range []uint32{uint32(len(data)) - 11, 1 << 30, 0xffffffff} {
		d := append([]byte(nil), data...)
		binary.LittleEndian.PutUint32(d[len(d)-8:], n)
		var m0, m1 runtime.MemStats
		runtime.ReadMemStats(&m0)
		_, err := newParquet("x.parquet", bytes.NewReader(d), int64(len(d)))
		runtime.ReadMemStats(&m1)
		if err == nil || !strings.Contains(err.Error(), "x.parquet: not a readable Parquet file: the footer is said to be") {
			t.Errorf("footer of %d bytes: %v", n, err)
		}
		if a := m1.TotalAlloc - m0.TotalAlloc; a > 1<<20 {
			t.Errorf("footer of %d bytes: %d bytes allocated to refuse it", n, a)
		}
	}
}

// TestROOTDeclaredLengths damages the lengths a ROOT file declares (the
// file header's free-segment length, the uncompressed sizes of the
// free-segment and streamer records, the top directory's key count; the
// layout of ROOT's file header, key header and TDirectory record, common
// practice of the ROOT file format): each is refused naming the file,
// without allocating the declared length (go-hep v0.36.0 allocates it
// first: up to 2 GB for one damaged byte).
func TestROOTDeclaredLengths(t *testing.T) {
	data, err := os.ReadFile("testdata/events.root")
	if err != nil {
		t.Fatal(err)
	}
	be := binary.BigEndian
	if v := be.Uint32(data[4:]); v >= 1000000 {
		t.Fatalf("the seed file is a large-file layout (version %d); the offsets below are for small files", v)
	}
	seekfree, seekinfo := be.Uint32(data[16:]), be.Uint32(data[37:])
	nbytesname := be.Uint32(data[28:])
	dir := be.Uint32(data[8:]) + nbytesname // the top directory follows the name record at fBEGIN
	seekkeys := be.Uint32(data[dir+26:])
	keylen := be.Uint16(data[seekkeys+14:])
	for _, c := range []struct {
		what string
		at   uint32
	}{
		{"free-segment length in the header", 20},
		{"free-segment record's object size", seekfree + 6},
		{"streamer record's object size", seekinfo + 6},
		{"key list's object size", seekkeys + 6},
		{"number of keys", seekkeys + uint32(keylen)},
	} {
		d := append([]byte(nil), data...)
		be.PutUint32(d[c.at:], 0x7ffffff0)
		var m0, m1 runtime.MemStats
		runtime.ReadMemStats(&m0)
		_, err := newROOT("x.root", memFile{bytes.NewReader(d)}, int64(len(d)), "events")
		runtime.ReadMemStats(&m1)
		if err == nil || !strings.Contains(err.Error(), "x.root: damaged ROOT file: ") {
			t.Errorf("%s damaged: %v", c.what, err)
		}
		if a := m1.TotalAlloc - m0.TotalAlloc; a > 16<<20 {
			t.Errorf("%s damaged: %d bytes allocated to refuse it", c.what, a)
		}
	}
}

// TestROOTObjectCounts reads the input the fuzz target FuzzROOT found
// (testdata/fuzz/FuzzROOT/branch-name-4gb, a mutation of
// testdata/events.root): the name of a branch inside the tree record
// declares a length of about 2 GB in a record of 1.7 kB, which go-hep
// v0.36.0 allocated before reading (4 GB in all, and an out-of-memory
// end of the process where memory is short). It is refused, naming a
// damaged record, without the allocation.
func TestROOTObjectCounts(t *testing.T) {
	b, err := os.ReadFile("testdata/fuzz/FuzzROOT/branch-name-4gb")
	if err != nil {
		t.Fatal(err)
	}
	// The corpus file format of go test: a header line, then the value
	// as a Go literal.
	lines := strings.SplitN(string(b), "\n", 2)
	lit := strings.TrimSpace(lines[1])
	s, err := strconv.Unquote(strings.TrimSuffix(strings.TrimPrefix(lit, "[]byte("), ")"))
	if err != nil {
		t.Fatal(err)
	}
	d := []byte(s)
	var m0, m1 runtime.MemStats
	runtime.ReadMemStats(&m0)
	_, err = newROOT("x.root", memFile{bytes.NewReader(d)}, int64(len(d)), "events")
	runtime.ReadMemStats(&m1)
	// The same mutation also damaged a zlib block of the streamer
	// record (its Adler-32 sum; RFC 1950), which is now found first; the
	// branch name alone is refused in rootio's TestTreeCounts.
	if err == nil || !strings.Contains(err.Error(), `x.root: damaged ROOT file: the streamer record at byte 1171 (TList "StreamerInfo") is damaged`) {
		t.Errorf("damaged branch name: %v", err)
	}
	if a := m1.TotalAlloc - m0.TotalAlloc; a > 16<<20 {
		t.Errorf("%d bytes allocated to refuse it", a)
	}
}
