package sparse

import (
	"bytes"
	"encoding/binary"
	"errors"
	"hash/crc32"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

func formatMatrices(t testing.TB) []*Matrix {
	rng := rand.New(rand.NewPCG(21, 22))
	var ms []*Matrix
	for _, sh := range kernelShapes[:6] {
		ms = append(ms, randomMatrix(t, rng, sh.rows, sh.cols, sh.density, sh.emptyEvery))
	}
	es := randomEntries(rng, 30, 20, 2000, 0.2)
	m, _ := accumulateSerial(t, 30, 20, es, nil)
	empty, err := NewMatrix(0, 0, []int{0}, nil, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	return append(ms, m, empty)
}

// save writes m to the file path with WriteTo.
func save(t testing.TB, m *Matrix, path string) {
	t.Helper()
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := m.WriteTo(f); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
}

func TestWriteToLoadRoundTrip(t *testing.T) {
	dir := t.TempDir()
	for k, m := range formatMatrices(t) {
		path := filepath.Join(dir, "m.dsm")
		save(t, m, path)
		st, err := os.Stat(path)
		if err != nil {
			t.Fatal(err)
		}
		if st.Size() != m.EncodedSize() {
			t.Errorf("matrix %d: file has %d bytes, EncodedSize %d", k, st.Size(), m.EncodedSize())
		}
		got, err := Load(path)
		if err != nil {
			t.Fatalf("matrix %d: %v", k, err)
		}
		if (got.SumW2() == nil) != (m.SumW2() == nil) {
			t.Fatalf("matrix %d: SumW2 presence changed", k)
		}
		if m.SumW2() == nil {
			// sameBits compares SumW2 too; give both the same.
			z := make([]float64, m.NNZ())
			m, _ = m.WithValues(m.Values(), z)
			got, _ = got.WithValues(got.Values(), z)
		}
		sameBits(t, "saved and loaded", m, got)
	}
}

func TestLoadDamaged(t *testing.T) {
	m := formatMatrices(t)[6] // accumulated, with SumW2
	var buf bytes.Buffer
	if _, err := m.WriteTo(&buf); err != nil {
		t.Fatal(err)
	}
	good := buf.Bytes()
	dir := t.TempDir()
	check := func(name string, data []byte) {
		t.Helper()
		if _, err := Read(bytes.NewReader(data)); !errors.Is(err, ErrFormat) && name != "trailing data" {
			t.Errorf("%s: Read error %v, want ErrFormat", name, err)
		}
		path := filepath.Join(dir, "bad.dsm")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		if _, err := Load(path); !errors.Is(err, ErrFormat) {
			t.Errorf("%s: Load error %v, want ErrFormat", name, err)
		}
	}
	for _, n := range []int{0, 5, headerSize - 1, headerSize, headerSize + 7, len(good) / 2, len(good) - 1} {
		check("truncated", good[:n])
	}
	check("trailing data", append(append([]byte(nil), good...), 0))
	for _, pos := range []int{0, 9, 17, 41, headerSize + 2, len(good) / 2, len(good) - 2} {
		bad := append([]byte(nil), good...)
		bad[pos] ^= 0x10
		check("flipped byte", bad)
	}
	if _, err := Load(filepath.Join(dir, "missing.dsm")); err == nil || errors.Is(err, ErrFormat) {
		t.Errorf("missing file: %v, want an I/O error", err)
	}
}

func FuzzRead(f *testing.F) {
	for _, m := range formatMatrices(f) {
		var buf bytes.Buffer
		if _, err := m.WriteTo(&buf); err != nil {
			f.Fatal(err)
		}
		f.Add(buf.Bytes())
		f.Add(buf.Bytes()[:buf.Len()/2])
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := Read(bytes.NewReader(data))
		if err != nil {
			return
		}
		// A file that reads back must re-encode to the same bytes.
		var buf bytes.Buffer
		if _, err := m.WriteTo(&buf); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(buf.Bytes(), data[:buf.Len()]) {
			t.Fatal("decoded matrix re-encodes differently")
		}
	})
}

// TestReadInconsistent edits fields of a valid file and recomputes both
// checksums, so that each content check of the reader (not the
// checksums) must refuse it.
func TestReadInconsistent(t *testing.T) {
	m := formatMatrices(t)[6] // accumulated 30×20, with SumW2
	var buf bytes.Buffer
	if _, err := m.WriteTo(&buf); err != nil {
		t.Fatal(err)
	}
	good := buf.Bytes()
	_, cols := m.Dims()
	rowsAt := headerSize + 4*cols // first row index
	// column 0's second entry, if column 0 has two
	if m.ColPtr()[1] < 2 {
		t.Fatal("test matrix: column 0 has fewer than two entries")
	}
	le := binary.LittleEndian
	for _, c := range []struct {
		name string
		edit func(b []byte)
	}{
		{"version 2", func(b []byte) { le.PutUint32(b[8:], 2) }},
		{"unknown flag", func(b []byte) { le.PutUint32(b[12:], 3) }},
		{"reserved word set", func(b []byte) { le.PutUint32(b[44:], 1) }},
		{"rows beyond 2^31", func(b []byte) { le.PutUint64(b[16:], 1<<31) }},
		{"more entries than cells", func(b []byte) { le.PutUint64(b[16:], 1); le.PutUint64(b[24:], uint64(cols)) }},
		{"column beyond the entries", func(b []byte) { le.PutUint32(b[headerSize:], uint32(m.NNZ()+1)) }},
		{"columns short of the entries", func(b []byte) { le.PutUint32(b[headerSize:], le.Uint32(b[headerSize:])-1) }},
		{"row out of range", func(b []byte) { le.PutUint32(b[rowsAt:], 30) }},
		{"rows not increasing", func(b []byte) { copy(b[rowsAt:rowsAt+4], b[rowsAt+4:rowsAt+8]) }},
		{"negative squared-weight sum", func(b []byte) {
			le.PutUint64(b[len(b)-12:], math.Float64bits(-1))
		}},
	} {
		bad := append([]byte(nil), good...)
		c.edit(bad)
		le.PutUint32(bad[40:], crc32.Checksum(bad[:40], castagnoli))
		le.PutUint32(bad[len(bad)-4:], crc32.Checksum(bad[:len(bad)-4], castagnoli))
		_, err := Read(bytes.NewReader(bad))
		if !errors.Is(err, ErrFormat) {
			t.Errorf("%s: Read error %v, want ErrFormat", c.name, err)
		}
		t.Logf("%s: %v", c.name, err)
	}
	// The edit-and-rechecksum route itself leaves a good file readable.
	ok := append([]byte(nil), good...)
	le.PutUint32(ok[len(ok)-4:], crc32.Checksum(ok[:len(ok)-4], castagnoli))
	if _, err := Read(bytes.NewReader(ok)); err != nil {
		t.Fatalf("re-checksummed good file: %v", err)
	}
}
