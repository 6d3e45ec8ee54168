package tables

import (
	"bytes"
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
)

// wantError checks that err is an *Error at the given line and field
// whose message contains each of the fragments.
func wantError(t *testing.T, err error, line int, field string, frags ...string) {
	t.Helper()
	var te *Error
	if !errors.As(err, &te) {
		t.Fatalf("got error %v (%T), want a *tables.Error", err, err)
	}
	if te.Line != line || te.Field != field {
		t.Errorf("error %q at line %d field %q, want line %d field %q", err, te.Line, te.Field, line, field)
	}
	for _, f := range frags {
		if !strings.Contains(err.Error(), f) {
			t.Errorf("error %q does not mention %q", err, f)
		}
	}
}

func TestReadResponse(t *testing.T) {
	const in = "\ufeff# a comment\nTruth, reco ,value,sumw2\n\n0,1,2.5,1.25\n# another\n2,0,1e3,10\n"
	r, err := ReadResponse(strings.NewReader(in), "A.csv")
	if err != nil {
		t.Fatal(err)
	}
	if r.Len() != 2 {
		t.Fatalf("%d entries, want 2", r.Len())
	}
	// Columns in any order: the header says truth first.
	if r.Truth[0] != 0 || r.Reco[0] != 1 || r.Value[0] != 2.5 || r.SumW2[0] != 1.25 || r.Line[0] != 4 {
		t.Errorf("entry 0 = (%d,%d,%v,%v) line %d", r.Reco[0], r.Truth[0], r.Value[0], r.SumW2[0], r.Line[0])
	}
	if r.Truth[1] != 2 || r.Reco[1] != 0 || r.Value[1] != 1000 || r.Line[1] != 6 {
		t.Errorf("entry 1 = (%d,%d,%v) line %d", r.Reco[1], r.Truth[1], r.Value[1], r.Line[1])
	}
	if nr, nt := r.Dims(); nr != 2 || nt != 3 {
		t.Errorf("Dims = %d, %d, want 2, 3", nr, nt)
	}
}

func TestReadVectorOptionalColumn(t *testing.T) {
	v, err := ReadVector(strings.NewReader("reco,value\n3,7\n0,1\n"), "n.csv", Data)
	if err != nil {
		t.Fatal(err)
	}
	if v.Err2 != nil {
		t.Errorf("Err2 = %v, want nil without a variance column", v.Err2)
	}
	val, e2, err := v.Dense(5, "")
	if err != nil {
		t.Fatal(err)
	}
	if e2 != nil || len(val) != 5 || val[3] != 7 || val[0] != 1 || val[1] != 0 {
		t.Errorf("Dense = %v, %v", val, e2)
	}
}

// Each malformed input gives an *Error at the right line and field.
func TestReadErrors(t *testing.T) {
	cases := []struct {
		name, in    string
		kind        Kind // for vectors; -1 for the response
		line        int
		field       string
		frags       []string
		sumw2Header bool
	}{
		{"empty file", "", -1, 0, "", []string{"empty", "reco,truth,value[,sumw2]"}, false},
		{"only comments", "# nothing\n", Data, 0, "", []string{"empty"}, false},
		{"no header", "0,1,2\n", -1, 1, "", []string{"header"}, false},
		{"unknown column", "reco,truth,value,weight\n", -1, 1, "weight", []string{"unknown column"}, false},
		{"missing column", "reco,value\n", -1, 1, "truth", []string{"required column"}, false},
		{"twice in header", "reco,truth,value,reco\n", -1, 1, "reco", []string{"twice"}, false},
		{"short row", "reco,truth,value\n0,1,2\n1,2\n", -1, 3, "", []string{"2 fields", "header has 3"}, false},
		{"long row", "reco,truth,value\n0,1,2,3\n", -1, 2, "", []string{"4 fields"}, false},
		{"bare quote", "reco,truth,value\n0,1,2\"x\n", -1, 2, "", []string{"malformed CSV"}, false},
		{"non-numeric value", "reco,truth,value\n0,1,abc\n", -1, 2, "value", []string{`"abc" is not a number`}, false},
		{"empty value", "reco,truth,value\n0,1,\n", -1, 2, "value", []string{"empty"}, false},
		{"NaN value", "reco,truth,value\n0,1,NaN\n", -1, 2, "value", []string{"NaN"}, false},
		{"Inf value", "reco,truth,value\n0,1,+Inf\n", -1, 2, "value", []string{"infinite"}, false},
		{"overflowing value", "reco,truth,value\n0,1,1e400\n", -1, 2, "value", []string{"infinite or too large"}, false},
		{"negative value", "reco,value\n0,-2\n", Data, 2, "value", []string{"-2 is negative"}, false},
		{"negative generated", "truth,value\n0,-2\n", Generated, 2, "value", []string{"-2 is negative"}, false},
		{"negative sumw2", "reco,truth,value,sumw2\n0,1,2,-1\n", -1, 2, "sumw2", []string{"negative"}, true},
		{"negative index", "reco,truth,value\n-1,1,2\n", -1, 2, "reco", []string{"negative"}, false},
		{"fractional index", "reco,truth,value\n0,1.5,2\n", -1, 2, "truth", []string{"not a bin index"}, false},
		{"huge index", "reco,truth,value\n0,99999999999999999999,2\n", -1, 2, "truth", []string{"too large"}, false},
		{"large index", "reco,truth,value\n0,2000000000,2\n", -1, 2, "truth", []string{"too large"}, false},
		{"data NaN variance", "reco,value,variance\n0,1,nan\n", Data, 2, "variance", []string{"NaN"}, true},
		{"generated wrong column", "reco,value\n0,1\n", Generated, 1, "reco", []string{"unknown column", "truth,value[,sumw2]"}, false},
		{"prior has no variance", "truth,value,variance\n0,1,1\n", Prior, 1, "variance", []string{"unknown column"}, false},
		{"comment then bad row", "# c\nreco,value\n# c\n\n2,x\n", Background, 5, "value", []string{"not a number"}, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var err error
			if c.kind < 0 {
				_, err = ReadResponse(strings.NewReader(c.in), "A.csv")
			} else {
				_, err = ReadVector(strings.NewReader(c.in), "v.csv", c.kind)
			}
			wantError(t, err, c.line, c.field, c.frags...)
		})
	}
}

func TestErrorFormat(t *testing.T) {
	_, err := ReadVector(strings.NewReader("truth,value\n0,-1\n"), "G.csv", Generated)
	if got, want := err.Error(), `G.csv:2: field "value": -1 is negative`; !strings.HasPrefix(got, want) {
		t.Errorf("message %q, want it to start with %q", got, want)
	}
}

func TestDenseErrors(t *testing.T) {
	v, err := ReadVector(strings.NewReader("reco,value\n0,1\n2,3\n0,4\n"), "n.csv", Data)
	if err != nil {
		t.Fatal(err)
	}
	_, _, err = v.Dense(3, "")
	wantError(t, err, 4, "reco", "given twice", "line 2")
	_, _, err = v.Dense(2, "the reco binning R.yaml")
	wantError(t, err, 3, "reco", "index 2 is beyond the 2 reco bins of the reco binning R.yaml")
}

func mustSet(t *testing.T, a, g, n, b, p string) *Set {
	t.Helper()
	s := &Set{}
	var err error
	if s.Response, err = ReadResponse(strings.NewReader(a), "A.csv"); err != nil {
		t.Fatal(err)
	}
	if s.Generated, err = ReadVector(strings.NewReader(g), "G.csv", Generated); err != nil {
		t.Fatal(err)
	}
	if s.Data, err = ReadVector(strings.NewReader(n), "n.csv", Data); err != nil {
		t.Fatal(err)
	}
	if b != "" {
		if s.Background, err = ReadVector(strings.NewReader(b), "b.csv", Background); err != nil {
			t.Fatal(err)
		}
	}
	if p != "" {
		if s.Prior, err = ReadVector(strings.NewReader(p), "p.csv", Prior); err != nil {
			t.Fatal(err)
		}
	}
	return s
}

// The assembled matrix equals the dense matrix written in the table,
// entry by entry, whatever the row order of the file.
func TestAssemble(t *testing.T) {
	a := "reco,truth,value,sumw2\n3,1,0.05,0.01\n0,0,0.6,0.1\n1,2,0.1,0.2\n1,0,0.2,0.3\n0,1,0.1,0.4\n2,2,0.6,0.5\n1,1,0.6,0.6\n2,0,0.05,0.7\n2,1,0.15,0.8\n3,2,0.2,0.9\n0,2,0,0\n"
	g := "truth,value\n0,1\n1,1\n2,1\n"
	n := "reco,value,variance\n0,667,700\n1,578,600\n2,325,330\n3,87,90\n"
	s := mustSet(t, a, g, n, "reco,value\n1,5\n", "truth,value\n0,1\n1,1\n2,1\n")
	z := s.Sizes()
	if z.Reco != 4 || z.Truth != 3 {
		t.Fatalf("Sizes = %+v", z)
	}
	p, err := s.Assemble(z)
	if err != nil {
		t.Fatal(err)
	}
	want := [4][3]float64{{0.60, 0.10, 0.00}, {0.20, 0.60, 0.10}, {0.05, 0.15, 0.60}, {0.00, 0.05, 0.20}}
	for i := range want {
		for j := range want[i] {
			if got := p.Migrations.At(i, j); got != want[i][j] {
				t.Errorf("A[%d][%d] = %v, want %v", i, j, got, want[i][j])
			}
		}
	}
	if p.Migrations.NNZ() != 10 {
		t.Errorf("NNZ = %d, want 10 (the explicit zero is not stored)", p.Migrations.NNZ())
	}
	// sumw2 follows its entry through the sort: entry (1,1) had 0.6.
	cp, ri, sw := p.Migrations.ColPtr(), p.Migrations.RowIdx(), p.Migrations.SumW2()
	for k := cp[1]; k < cp[2]; k++ {
		if ri[k] == 1 && sw[k] != 0.6 {
			t.Errorf("sumw2 of (1,1) = %v, want 0.6", sw[k])
		}
	}
	if p.DataVariance[2] != 330 || p.Background[1] != 5 || p.Background[0] != 0 || p.BackgroundVariance != nil || len(p.Prior) != 3 {
		t.Errorf("vectors: var %v, b %v, bvar %v, prior %v", p.DataVariance, p.Background, p.BackgroundVariance, p.Prior)
	}
}

func TestAssembleErrors(t *testing.T) {
	g3 := "truth,value\n0,10\n1,10\n2,10\n"
	n2 := "reco,value\n0,5\n1,5\n"
	cases := []struct {
		name    string
		a, g, n string
		z       *Sizes
		file    string
		line    int
		field   string
		frags   []string
	}{
		{"empty response", "reco,truth,value\n", g3, n2, nil, "A.csv", 0, "", []string{"empty", "no entries"}},
		{"all-zero response", "reco,truth,value\n0,0,0\n", g3, n2, nil, "A.csv", 0, "", []string{"all zero"}},
		{"duplicate cell", "reco,truth,value\n0,0,1\n1,1,1\n0,0,2\n", g3, n2, nil, "A.csv", 4, "", []string{"reco 0, truth 0 is given twice", "line 2"}},
		{"no generated row", "reco,truth,value\n0,0,1\n1,2,3\n1,3,1\n", g3, n2, nil, "A.csv", 4, "truth", []string{"truth bin 3 has response entries", "G.csv has no row"}},
		{"generated zero", "reco,truth,value\n0,0,1\n1,1,1\n", "truth,value\n0,1\n1,0\n", n2, nil, "A.csv", 3, "truth", []string{"truth bin 1", "gives 0 on line 3"}},
		{"efficiency above one", "reco,truth,value\n0,0,6\n1,0,5\n", g3, n2, nil, "G.csv", 2, "value", []string{"truth bin 0", "below the sum 11", "efficiency 1.1"}},
		{"beyond truth binning", "reco,truth,value\n0,0,1\n1,5,1\n", g3, n2, &Sizes{Reco: 2, Truth: 3, TruthOrigin: "the truth binning T.yaml"}, "A.csv", 3, "truth", []string{"index 5 is beyond the 3 truth bins of the truth binning T.yaml"}},
		{"data beyond reco binning", "reco,truth,value\n0,0,1\n", g3, "reco,value\n0,1\n4,1\n", &Sizes{Reco: 2, Truth: 3, RecoOrigin: "the reco binning R.yaml"}, "n.csv", 3, "reco", []string{"index 4 is beyond the 2 reco bins"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := mustSet(t, c.a, c.g, c.n, "", "")
			z := s.Sizes()
			if c.z != nil {
				z = *c.z
			}
			_, err := s.Assemble(z)
			wantError(t, err, c.line, c.field, c.frags...)
			if te := (*Error)(nil); errors.As(err, &te) && te.File != c.file {
				t.Errorf("error in file %q, want %q", te.File, c.file)
			}
		})
	}
}

// Locate maps the kernel's bin-level errors back to a table row.
func TestLocate(t *testing.T) {
	s := mustSet(t, "reco,truth,value\n0,0,1\n", "truth,value\n0,10\n", "reco,value\n0,5\n1,7\n", "", "")
	err := s.Locate(&unfold.InputError{Field: "Data", Reco: 1, Truth: -1, Reason: "count 7 in a reco bin that no truth bin reaches"})
	wantError(t, err, 3, "value", "reco bin 1", "no truth bin reaches")
	// A variance problem names the variance column.
	err = s.Locate(&unfold.InputError{Field: "DataVariance", Reco: 0, Truth: -1, Reason: "variance 0 of a positive count"})
	wantError(t, err, 2, "variance", "reco bin 0")
	// A response cell names the response table's row.
	err = s.Locate(&unfold.InputError{Field: "Migrations", Reco: 0, Truth: 0, Reason: "negative migration count"})
	wantError(t, err, 2, "value", "negative migration count")
	// A bin without a row in the table names the file only.
	err = s.Locate(&unfold.InputError{Field: "Generated", Reco: -1, Truth: 4, Reason: "no generated count"})
	wantError(t, err, 0, "", "truth bin 4", "no generated count")
	other := errors.New("other")
	if s.Locate(other) != other {
		t.Error("Locate changed an unrelated error")
	}
}

// Writing a matrix and a vector and reading them back gives the same
// bits (shortest round-trip formatting, strconv).
func TestWriteRoundTrip(t *testing.T) {
	val := []float64{0.1, 1.0 / 3, 2e-300, 12345678.9}
	sw := []float64{0.01, 1.0 / 9, 0, 1e10}
	m, err := sparse.NewMatrix(3, 2, []int{0, 2, 4}, []int{0, 2, 1, 2}, val, sw)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WriteResponse(&buf, m); err != nil {
		t.Fatal(err)
	}
	r, err := ReadResponse(&buf, "A.csv")
	if err != nil {
		t.Fatal(err)
	}
	got, err := r.Matrix(Sizes{Reco: 3, Truth: 2})
	if err != nil {
		t.Fatal(err)
	}
	for k := range val {
		if got.Values()[k] != val[k] || got.SumW2()[k] != sw[k] || got.RowIdx()[k] != m.RowIdx()[k] {
			t.Errorf("entry %d: got (%d, %v, %v), want (%d, %v, %v)", k, got.RowIdx()[k], got.Values()[k], got.SumW2()[k], m.RowIdx()[k], val[k], sw[k])
		}
	}

	vec := []float64{0, math.Pi, 1e-5}
	vv := []float64{0, math.E, 3}
	buf.Reset()
	if err := WriteVector(&buf, Data, vec, vv); err != nil {
		t.Fatal(err)
	}
	v, err := ReadVector(&buf, "n.csv", Data)
	if err != nil {
		t.Fatal(err)
	}
	gv, ge, err := v.Dense(3, "")
	if err != nil {
		t.Fatal(err)
	}
	for i := range vec {
		if gv[i] != vec[i] || ge[i] != vv[i] {
			t.Errorf("bin %d: got (%v, %v), want (%v, %v)", i, gv[i], ge[i], vec[i], vv[i])
		}
	}
}

// A response cell may be negative (negative event weights, common
// practice at next-to-leading order): the reader keeps it for the
// negative-cell remedy of the unfolding; its sumw2 may not.
func TestResponseNegativeCell(t *testing.T) {
	r, err := ReadResponse(strings.NewReader("reco,truth,value,sumw2\n0,0,5,4\n1,0,-2,3\n"), "A.csv")
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Value) != 2 || r.Value[1] != -2 {
		t.Fatalf("values %v, want [5 -2]", r.Value)
	}
	if _, err := ReadResponse(strings.NewReader("reco,truth,value,sumw2\n1,0,-2,-3\n"), "A.csv"); err == nil || !strings.Contains(err.Error(), "negative") {
		t.Fatalf("negative sumw2: got %v, want a refusal", err)
	}
}

// FuzzReadResponse checks that no input makes the reader panic, and that
// every accepted table holds only finite values (negative ones allowed
// for the remedy) and in-range indices.
func FuzzReadResponse(f *testing.F) {
	f.Add("reco,truth,value\n0,1,2\n")
	f.Add("reco,truth,value,sumw2\n# c\n3,1,0.5,0.25\n")
	f.Add("truth,reco,value\n\"1\",\"2\",3\n")
	f.Fuzz(func(t *testing.T, in string) {
		r, err := ReadResponse(strings.NewReader(in), "A.csv")
		if err != nil {
			return
		}
		for k := range r.Value {
			if math.IsNaN(r.Value[k]) || math.IsInf(r.Value[k], 0) || r.Reco[k] < 0 || r.Truth[k] < 0 || r.Reco[k] > MaxIndex || r.Truth[k] > MaxIndex {
				t.Fatalf("accepted entry %d: (%d,%d,%v)", k, r.Reco[k], r.Truth[k], r.Value[k])
			}
		}
		z := r.Dims
		nr, nt := z()
		if nr < 1000 && nt < 1000 {
			_, _ = r.Matrix(Sizes{Reco: nr, Truth: nt})
		}
	})
}

// Programming errors panic rather than return an error value.
func TestPanics(t *testing.T) {
	for name, f := range map[string]func(){
		"ReadVector invalid Kind":    func() { ReadVector(strings.NewReader("truth,value\n"), "v.csv", Kind(7)) },
		"WriteVector invalid Kind":   func() { WriteVector(&bytes.Buffer{}, Kind(-1), nil, nil) },
		"WriteVector short err2":     func() { WriteVector(&bytes.Buffer{}, Data, []float64{1, 2}, []float64{1}) },
		"WriteVector err2 for prior": func() { WriteVector(&bytes.Buffer{}, Prior, []float64{1}, []float64{1}) },
		"Assemble without data":      func() { (&Set{Response: &Response{}, Generated: &Vector{}}).Assemble(Sizes{}) },
	} {
		t.Run(name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Error("no panic")
				}
			}()
			f()
		})
	}
}
