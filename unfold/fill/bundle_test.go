package fill

import (
	"context"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

func TestBundleRoundTrip(t *testing.T) {
	b := NewBuilder(handTruth, handReco)
	if _, err := b.Add(context.Background(), handSimulation(4), nil); err != nil {
		t.Fatal(err)
	}
	r, err := b.Response()
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "resp")
	info := BundleInfo{TruthScheme: "t", RecoScheme: "r", Program: "test"}
	if err := r.Save(dir, info, false); err != nil {
		t.Fatal(err)
	}
	if err := r.Save(dir, info, false); err == nil {
		t.Fatal("an existing bundle was overwritten without replace")
	}
	if err := r.Save(dir, info, true); err != nil {
		t.Fatal(err)
	}
	got, gi, err := LoadResponse(dir)
	if err != nil {
		t.Fatal(err)
	}
	if gi.TruthScheme != "t" || gi.RecoScheme != "r" || gi.Program != "test" {
		t.Errorf("info %+v", gi)
	}
	m, g := r.Migrations, got.Migrations
	if !slices.Equal(m.ColPtr(), g.ColPtr()) || !slices.Equal(m.RowIdx(), g.RowIdx()) || !slices.Equal(m.Values(), g.Values()) || !slices.Equal(m.SumW2(), g.SumW2()) {
		t.Error("matrix differs after the round trip")
	}
	if !slices.Equal(r.Generated, got.Generated) || !slices.Equal(r.FakesSumW2, got.FakesSumW2) || !slices.Equal(r.RecoInTruth, got.RecoInTruth) {
		t.Error("vectors differ after the round trip")
	}
	if got.Summary.Fakes != r.Summary.Fakes || got.Summary.NegativeCellCount != 1 {
		t.Errorf("summary %+v", got.Summary)
	}
	// A damaged matrix file is an error, not a panic.
	p := filepath.Join(dir, bundleMatrix)
	data, _ := os.ReadFile(p)
	data[40] ^= 1
	os.WriteFile(p, data, 0o644)
	if _, _, err := LoadResponse(dir); err == nil {
		t.Errorf("damaged file: got %v", err)
	}
	os.WriteFile(p, data[:20], 0o644)
	if _, _, err := LoadResponse(dir); err == nil {
		t.Error("truncated file loaded")
	}
}
