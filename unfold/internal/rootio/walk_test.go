package rootio

import (
	"bytes"
	"encoding/binary"
	"os"
	"testing"
)

// walkRecords walks the objects of every record of a walked class in the
// ROOT file data, from the first record to the end (ROOT file format,
// common practice: records follow one another from fBEGIN to fEND, each a
// key header then the payload), and returns the walkers by the records'
// classes.
func walkRecords(t *testing.T, data []byte) map[string][]*walker {
	t.Helper()
	be := binary.BigEndian
	if be.Uint32(data[4:]) >= 1000000 {
		t.Fatal("a large-file layout; the offsets below are for small files")
	}
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
			w := &walker{b: p, base: k.keylen, refs: map[int64]string{}}
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
		{"testdata/hists.root", []string{"TList"}},
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
