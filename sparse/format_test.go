package sparse

import (
	"bytes"
	"errors"
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

func TestSaveLoadRoundTrip(t *testing.T) {
	dir := t.TempDir()
	for k, m := range formatMatrices(t) {
		path := filepath.Join(dir, "m.dsm")
		if err := m.Save(path); err != nil {
			t.Fatal(err)
		}
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
	if ents, _ := os.ReadDir(dir); len(ents) != 1 {
		t.Errorf("Save left %d files in the directory, want 1", len(ents))
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

func TestSaveAtomicOnFailure(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "no-such-dir", "m.dsm")
	if err := formatMatrices(t)[0].Save(path); err == nil {
		t.Error("Save into a missing directory succeeded")
	}
	// An existing file is replaced only when the new one is complete.
	path = filepath.Join(dir, "m.dsm")
	ms := formatMatrices(t)
	if err := ms[0].Save(path); err != nil {
		t.Fatal(err)
	}
	if err := ms[1].Save(path); err != nil {
		t.Fatal(err)
	}
	got, err := Load(path)
	if err != nil {
		t.Fatal(err)
	}
	if r, c := got.Dims(); r != 40 || c != 1 {
		t.Errorf("replaced file holds a %d×%d matrix, want 40×1", r, c)
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
