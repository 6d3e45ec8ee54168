package events

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/compress"
	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/riofs"
	"go-hep.org/x/hep/groot/rtree"

	"github.com/desmear/desmear/unfold/internal/eventfile"
)

// TestROOTSmallFlatTree reads groot/testdata/small-flat-tree.root, a file
// written by ROOT 6.08 (file version 60806). Entry i holds the value i in
// its scalar branches Int32, Int64, UInt32, UInt64, Float32 and Float64, as
// listed by go-hep's dump of the same file (groot/rcmd/testdata/
// small-flat-tree.root.txt).
func TestROOTSmallFlatTree(t *testing.T) {
	path := filepath.Join(hepDir(t), "groot", "testdata", "small-flat-tree.root")
	src, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	if src.Len() != 100 {
		t.Errorf("Len = %d, want 100", src.Len())
	}
	want := []string{"Int32", "Int64", "UInt32", "UInt64", "Float32", "Float64", "N"}
	if !reflect.DeepEqual(src.Columns(), want) {
		t.Errorf("Columns = %v, want %v", src.Columns(), want)
	}
	cols := []string{"Float32", "Float64", "Int32", "Int64", "UInt32", "UInt64", "Float32"}
	for _, bs := range []int{1, 7, 100, 1000} {
		got := readAll(t, src, cols, bs)
		for c, name := range cols {
			if len(got[c]) != 100 {
				t.Fatalf("batch %d: %s: %d values", bs, name, len(got[c]))
			}
			for i, v := range got[c] {
				if v != float64(i) {
					t.Fatalf("batch %d: %s[%d] = %v, want %d", bs, name, i, v, i)
				}
			}
		}
	}
	for _, tc := range []struct{ branch, msg string }{
		{"ArrayFloat32", "fixed-size array of 10 values"},
		{"SliceFloat64", "variable-length array"},
		{"Str", "it holds text, not numbers"},
		{"Float128", `no branch "Float128"`},
	} {
		err := src.Read(context.Background(), []string{"Float64", tc.branch}, 10, func(*Batch) error { return nil })
		if err == nil || !strings.Contains(err.Error(), tc.msg) || !strings.Contains(err.Error(), path) ||
			!strings.Contains(err.Error(), tc.branch) {
			t.Errorf("branch %s: error %v, want one naming the file, the branch and %q", tc.branch, err, tc.msg)
		}
	}
}

// TestROOTLeavesAllTypes reads groot/testdata/leaves.root, written by ROOT
// from the C++ macro in go-hep's groot/riofs/gendata/gen-flat-tree.go: 10
// entries, entry i has B = (i%2 == 0), I8..I64 and G64 = -i, U8..U64 and
// UGG = i, F32, F64, D16 (Float16_t) and D32 (Double32_t) = i.
func TestROOTLeavesAllTypes(t *testing.T) {
	path := filepath.Join(hepDir(t), "groot", "testdata", "leaves.root")
	src, err := OpenROOT(path, "tree")
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	names := []string{"B", "I8", "I16", "I32", "I64", "G64", "U8", "U16", "U32", "U64", "UGG", "F32", "F64", "D16", "D32"}
	got := readAll(t, src, names, 4)
	for c, name := range names {
		if len(got[c]) != 10 {
			t.Fatalf("%s: %d entries, want 10", name, len(got[c]))
		}
		for i, v := range got[c] {
			var want float64
			switch name[0] {
			case 'B':
				want = b2f(i%2 == 0)
			case 'I', 'G':
				want = -float64(i)
			default:
				want = float64(i)
			}
			if v != want {
				t.Errorf("%s[%d] = %v, want %v", name, i, v, want)
			}
		}
	}
}

// TestROOTBranchTypesRoundTrip writes a tree with one branch of every
// supported scalar type through go-hep's writer and reads it back as
// float64, which must equal Go's own conversion of each value.
func TestROOTBranchTypesRoundTrip(t *testing.T) {
	const n = 300
	var (
		vb   bool
		vi8  int8
		vi16 int16
		vi32 int32
		vi64 int64
		vu8  uint8
		vu16 uint16
		vu32 uint32
		vu64 uint64
		vf32 float32
		vf64 float64
	)
	wvars := []rtree.WriteVar{
		{Name: "b", Value: &vb}, {Name: "i8", Value: &vi8}, {Name: "i16", Value: &vi16},
		{Name: "i32", Value: &vi32}, {Name: "i64", Value: &vi64}, {Name: "u8", Value: &vu8},
		{Name: "u16", Value: &vu16}, {Name: "u32", Value: &vu32}, {Name: "u64", Value: &vu64},
		{Name: "f32", Value: &vf32}, {Name: "f64", Value: &vf64},
	}
	rng := rand.New(rand.NewPCG(3, 4))
	want := make([][]float64, len(wvars))
	path := filepath.Join(t.TempDir(), "types.root")
	f, err := groot.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := rtree.NewWriter(f, "t", wvars)
	if err != nil {
		t.Fatal(err)
	}
	for k := range n {
		u := rng.Uint64()
		vb = u&1 == 1
		vi8, vi16, vi32, vi64 = int8(u), int16(u), int32(u), int64(u)
		vu8, vu16, vu32, vu64 = uint8(u), uint16(u), uint32(u), u
		vf32 = float32(rng.NormFloat64() * 1e3)
		vf64 = rng.NormFloat64() * 1e-3
		if k == 0 {
			vf32, vf64 = float32(math.Inf(-1)), math.MaxFloat64
		}
		row := []float64{b2f(vb), float64(vi8), float64(vi16), float64(vi32), float64(vi64),
			float64(vu8), float64(vu16), float64(vu32), float64(vu64), float64(vf32), vf64}
		for c := range row {
			want[c] = append(want[c], row[c])
		}
		if _, err := w.Write(); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if err := f.Close(); err != nil {
		t.Fatal(err)
	}
	src, err := Open(path, Options{Tree: "t"})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	names := make([]string, len(wvars))
	for i, v := range wvars {
		names[i] = v.Name
	}
	got := readAll(t, src, names, 64)
	for c := range names {
		if i, ok := sameBits(got[c], want[c]); !ok {
			t.Errorf("branch %s: entry %d: got %v, want %v", names[c], i, got[c][i], want[c][i])
		}
	}
}

// sampleColumns returns events with awkward values: signed zeros,
// subnormals, extremes, infinities and NaN.
func sampleColumns(n int) ([]string, [][]float64) {
	rng := rand.New(rand.NewPCG(5, 6))
	names := []string{"pt_true", "pt_reco", "y_true", "weight", "pass_reco"}
	cols := make([][]float64, len(names))
	for c := range cols {
		cols[c] = make([]float64, n)
	}
	special := []float64{0, math.Copysign(0, -1), 5e-324, -math.MaxFloat64, math.Inf(1), math.NaN(), 1.0 / 3, 123456789012345678}
	for k := range n {
		cols[0][k] = math.Exp(rng.Float64() * 8)
		cols[1][k] = cols[0][k] * (1 + 0.1*rng.NormFloat64())
		cols[2][k] = rng.NormFloat64() * 2
		cols[3][k] = rng.Float64()
		cols[4][k] = float64(rng.IntN(2))
		if k < len(special) {
			cols[1][k] = special[k]
		}
	}
	return names, cols
}

// writeOpen writes the columns to the file p in the format its extension
// names (.root, .parquet, otherwise CSV) and opens it.
func writeOpen(t *testing.T, p string, names []string, cols [][]float64) Source {
	t.Helper()
	var err error
	switch filepath.Ext(p) {
	case ".root":
		err = eventfile.WriteROOT(p, "events", names, cols)
	case ".parquet":
		err = eventfile.WriteParquet(p, names, cols)
	default:
		err = eventfile.WriteCSV(p, names, cols)
	}
	if err != nil {
		t.Fatal(err)
	}
	src, err := Open(p, Options{})
	if err != nil {
		t.Fatal(err)
	}
	return src
}

// TestFormatsAgree writes the same events as ROOT, Parquet and CSV and reads
// them back: every format must return the written float64 values bit for
// bit, in the same order, for several batch sizes.
func TestFormatsAgree(t *testing.T) {
	dir := t.TempDir()
	names, cols := sampleColumns(2500)
	files := map[string]func(string) error{
		"ev.root":    func(p string) error { return eventfile.WriteROOT(p, "events", names, cols) },
		"ev.parquet": func(p string) error { return eventfile.WriteParquet(p, names, cols) },
		"ev.csv":     func(p string) error { return eventfile.WriteCSV(p, names, cols) },
	}
	order := []string{"weight", "pt_reco", "pass_reco", "pt_true", "y_true", "pt_reco"}
	idx := map[string]int{}
	for i, n := range names {
		idx[n] = i
	}
	for file, write := range files {
		p := filepath.Join(dir, file)
		if err := write(p); err != nil {
			t.Fatal(err)
		}
		src, err := Open(p, Options{})
		if err != nil {
			t.Fatal(err)
		}
		if got := src.Columns(); len(got) != len(names) {
			t.Errorf("%s: columns %v", file, got)
		}
		for _, bs := range []int{1, 999, 4096} {
			got := readAll(t, src, order, bs)
			for c, name := range order {
				if i, ok := sameBits(got[c], cols[idx[name]]); !ok {
					t.Fatalf("%s batch %d: column %s differs at %d", file, bs, name, i)
				}
			}
		}
		src.Close()
	}
	if tmp := tempFiles(t, dir); len(tmp) > 0 {
		t.Errorf("temporary files left behind: %v", tmp)
	}
}

// TestParquetTypes reads the Parquet physical types other writers use:
// FLOAT, INT32, INT64, unsigned INT32, BOOLEAN, an optional DOUBLE without
// nulls and a dictionary-encoded DOUBLE, over several row groups and pages.
func TestParquetTypes(t *testing.T) {
	type row struct {
		F32  float32  `parquet:"f32"`
		I32  int32    `parquet:"i32"`
		I64  int64    `parquet:"i64"`
		U32  uint32   `parquet:"u32"`
		B    bool     `parquet:"b"`
		Opt  *float64 `parquet:"opt,optional"`
		Dict float64  `parquet:"dict,dict"`
		DicI int32    `parquet:"dicti,dict"`
		DicB bool     `parquet:"dictb,dict"`
		Name string   `parquet:"name"`
	}
	const n = 5000
	rows := make([]row, n)
	want := make([][]float64, 9)
	for k := range rows {
		v := float64(k) - 2000
		r := row{F32: float32(v) / 8, I32: int32(-k * 1000), I64: int64(k) << 40, U32: math.MaxUint32 - uint32(k),
			B: k%3 == 0, Dict: float64(k % 7), DicI: int32(k%5) - 2, DicB: k%4 == 1, Name: "x"}
		o := v * 1.5
		r.Opt = &o
		rows[k] = r
		for c, x := range []float64{float64(r.F32), float64(r.I32), float64(r.I64), float64(r.U32), b2f(r.B), o, r.Dict, float64(r.DicI), b2f(r.DicB)} {
			want[c] = append(want[c], x)
		}
	}
	path := filepath.Join(t.TempDir(), "types.parquet")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := parquet.NewGenericWriter[row](f, parquet.MaxRowsPerRowGroup(1500), parquet.PageBufferSize(1024))
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	src, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	if src.Len() != n {
		t.Errorf("Len = %d, want %d", src.Len(), n)
	}
	names := []string{"f32", "i32", "i64", "u32", "b", "opt", "dict", "dicti", "dictb"}
	got := readAll(t, src, names, 1000)
	for c, name := range names {
		if i, ok := sameBits(got[c], want[c]); !ok {
			t.Errorf("column %s: row %d: got %v, want %v", name, i, got[c][i], want[c][i])
		}
	}
	err = src.Read(context.Background(), []string{"name"}, 10, func(*Batch) error { return nil })
	if err == nil || !strings.Contains(err.Error(), "not numeric") {
		t.Errorf("string column: error %v", err)
	}
}

// TestParquetUnsupported checks that columns without one number per event
// are listed as unreadable with the reason, and that a missing column lists
// the readable ones.
func TestParquetUnsupported(t *testing.T) {
	type inner struct {
		A float64 `parquet:"a"`
	}
	type row struct {
		X     float64   `parquet:"x"`
		List  []float64 `parquet:"list"`
		Group inner     `parquet:"group"`
		Dec   int64     `parquet:"dec,decimal(2:18)"`
	}
	path := filepath.Join(t.TempDir(), "nested.parquet")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := parquet.NewGenericWriter[row](f)
	if _, err := w.Write([]row{{X: 1, List: []float64{1, 2}, Group: inner{A: 3}, Dec: 314}}); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	src, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	if got := src.Columns(); !reflect.DeepEqual(got, []string{"x"}) {
		t.Errorf("Columns = %v, want [x]", got)
	}
	for col, want := range map[string]string{
		"list":  `column "list" cannot be read: it is a repeated (list) column`,
		"group": `column "group" cannot be read: it is a group of columns`,
		"dec":   `column "dec" cannot be read: decimal columns are not supported`,
		"y":     `no column "y" (have: x)`,
	} {
		err := src.Read(context.Background(), []string{"x", col}, 10, func(*Batch) error { return nil })
		if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), path) {
			t.Errorf("%s: error %v, want %q", col, err, want)
		}
	}
}

func TestParquetNulls(t *testing.T) {
	type row struct {
		X *float64 `parquet:"x,optional"`
	}
	rows := make([]row, 10)
	for k := range rows {
		if k != 6 {
			v := float64(k)
			rows[k].X = &v
		}
	}
	path := filepath.Join(t.TempDir(), "nulls.parquet")
	f, _ := os.Create(path)
	w := parquet.NewGenericWriter[row](f)
	w.Write(rows)
	w.Close()
	f.Close()
	src, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	err = src.Read(context.Background(), []string{"x"}, 4, func(*Batch) error { return nil })
	if err == nil || !strings.Contains(err.Error(), "null") || !strings.Contains(err.Error(), `"x"`) {
		t.Errorf("nulls: error %v", err)
	}
}

func TestCSVErrors(t *testing.T) {
	dir := t.TempDir()
	write := func(name, body string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(body), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	for _, tc := range []struct {
		name, body string
		cols       []string
		want       string // substring of the error; "" means no error
	}{
		{"ok.csv", "a, b\n1,2\n# comment\n3,true\n", []string{"b", "a"}, ""},
		{"bad.csv", "a,b\n1,2\n3,x7\n", []string{"a", "b"}, `bad.csv:3:3: column "b": "x7" is not a number`},
		{"short.csv", "a,b\n1,2\n3\n", []string{"a"}, "short.csv:3:1: wrong number of fields"},
		{"empty.csv", "", nil, "empty file"},
		{"dup.csv", "a,b,a\n1,2,3\n", nil, `column "a" appears twice`},
		{"nohead.csv", " ,b\n", nil, "header field 1 is empty"},
		{"missing.csv", "a,b\n1,2\n", []string{"c"}, `no column "c" (have: a, b)`},
		{"emptyfield.csv", "a,b\n1,\n", []string{"b"}, `emptyfield.csv:2:3: column "b": "" is not a number`},
		{"quoted.csv", "a,\"b\"\n\"1\",\" 2\"\n\n#c\n\"3\",x\n", []string{"b"}, `quoted.csv:5:5: column "b": "x" is not a number`},
		{"multiline.csv", "a,b\n1,\"2\n3\"\n", []string{"b"}, "multiline.csv:2:"},
		{"crlf.csv", "a,b\r\n1,2\r\n3,4", []string{"b"}, ""},
		{"bools.csv", "a,b\nfalse,TRUE\n False ,+Inf\n", []string{"a", "b"}, ""},
		// A number beyond the largest float64 (about 1.8e308, IEEE 754) is
		// refused rather than read as +Inf.
		{"huge.csv", "a,b\n1,2\n3,-1e400\n", []string{"a", "b"}, `huge.csv:3:3: column "b": "-1e400" is too large for a 64-bit float; give a finite number`},
	} {
		p := write(tc.name, tc.body)
		src, err := Open(p, Options{})
		if err == nil {
			err = src.Read(context.Background(), tc.cols, 2, func(*Batch) error { return nil })
		}
		switch {
		case tc.want == "" && err != nil:
			t.Errorf("%s: %v", tc.name, err)
		case tc.want != "" && (err == nil || !strings.Contains(err.Error(), tc.want)):
			t.Errorf("%s: error %v, want %q", tc.name, err, tc.want)
		}
	}
	for file, want := range map[string][][]float64{
		"ok.csv":     {{2, 1}, {1, 3}},
		"crlf.csv":   {{2, 4}, {1, 3}},
		"quoted.csv": {{2}, {1}},
		"bools.csv":  {{1, math.Inf(1)}, {0, 0}}, // an infinity written as such is read as written
	} {
		src, _ := Open(filepath.Join(dir, file), Options{})
		var got [][]float64
		if file == "quoted.csv" {
			// only the first event: the second has a bad value
			src.Read(context.Background(), []string{"b", "a"}, 1, func(b *Batch) error {
				if got == nil {
					got = [][]float64{{b.Cols[0][0]}, {b.Cols[1][0]}}
				}
				return nil
			})
		} else {
			got = readAll(t, src, []string{"b", "a"}, 5)
		}
		if !reflect.DeepEqual(got, want) {
			t.Errorf("%s read %v, want %v", file, got, want)
		}
	}
	// A line longer than the read buffer.
	const wide = 400000
	var sb strings.Builder
	for i := range wide {
		if i > 0 {
			sb.WriteByte(',')
		}
		fmt.Fprintf(&sb, "c%d", i)
	}
	sb.WriteByte('\n')
	for range 2 {
		for i := range wide {
			if i > 0 {
				sb.WriteByte(',')
			}
			fmt.Fprintf(&sb, "%d", i%97)
		}
		sb.WriteByte('\n')
	}
	src, err := Open(write("wide.csv", sb.String()), Options{})
	if err != nil {
		t.Fatal(err)
	}
	got := readAll(t, src, []string{"c399999", "c5"}, 10)
	if !reflect.DeepEqual(got, [][]float64{{399999 % 97, 399999 % 97}, {5, 5}}) {
		t.Errorf("wide.csv read %v", got)
	}
}

// TestTruncated cuts valid files short: opening or reading them must fail
// with an error naming the file, never panic or return short data silently.
func TestTruncated(t *testing.T) {
	dir := t.TempDir()
	names, cols := sampleColumns(20000)
	for _, file := range []string{"t.root", "t.parquet"} {
		full := filepath.Join(dir, file)
		var err error
		if strings.HasSuffix(file, ".root") {
			err = eventfile.WriteROOT(full, "events", names, cols)
		} else {
			err = eventfile.WriteParquet(full, names, cols)
		}
		if err != nil {
			t.Fatal(err)
		}
		data, _ := os.ReadFile(full)
		for _, frac := range []float64{0.02, 0.5, 0.97} {
			cut := filepath.Join(dir, fmt.Sprintf("cut-%g-%s", frac, file))
			os.WriteFile(cut, data[:int(float64(len(data))*frac)], 0o644)
			src, err := Open(cut, Options{})
			if err == nil {
				var n int64
				err = src.Read(context.Background(), names, 1000, func(b *Batch) error { n += int64(b.Len); return nil })
				src.Close()
				if err == nil {
					t.Errorf("%s cut at %g: read %d rows without error", file, frac, n)
					continue
				}
			}
			if !strings.Contains(err.Error(), cut) {
				t.Errorf("%s cut at %g: error does not name the file: %v", file, frac, err)
			}
		}
	}
}

func TestReadStopsOnError(t *testing.T) {
	dir := t.TempDir()
	names, cols := sampleColumns(1000)
	stop := errors.New("stop here")
	for _, file := range []string{"s.root", "s.parquet", "s.csv"} {
		src := writeOpen(t, filepath.Join(dir, file), names, cols)
		calls := 0
		err := src.Read(context.Background(), names[:2], 100, func(*Batch) error {
			calls++
			if calls == 3 {
				return stop
			}
			return nil
		})
		if err != stop || calls != 3 {
			t.Errorf("%s: error %v after %d calls, want the callback's error after 3", file, err, calls)
		}
		ctx, cancel := context.WithCancel(context.Background())
		calls = 0
		err = src.Read(ctx, names[:2], 100, func(*Batch) error {
			calls++
			if calls == 2 {
				cancel()
			}
			return nil
		})
		if !errors.Is(err, context.Canceled) || calls != 2 {
			t.Errorf("%s: cancelled read: error %v after %d calls", file, err, calls)
		}
		src.Close()
	}
}

func TestOpenErrors(t *testing.T) {
	dir := t.TempDir()
	if _, err := Open(filepath.Join(dir, "x.txt"), Options{}); err == nil || !strings.Contains(err.Error(), "unknown file type") {
		t.Errorf("unknown extension: %v", err)
	}
	// A missing file gets the same message in every format.
	for _, f := range []string{"none.root", "none.parquet", "none.csv"} {
		p := filepath.Join(dir, f)
		if _, err := Open(p, Options{}); err == nil || err.Error() != "events: open "+p+": no such file or directory" {
			t.Errorf("missing %s: %v", f, err)
		}
	}
	p := filepath.Join(dir, "two.root")
	names, cols := sampleColumns(10)
	if err := eventfile.WriteROOT(p, "events", names, cols); err != nil {
		t.Fatal(err)
	}
	// The message lists the trees the file has, and not groot's text, which
	// names the file by the (possibly temporary) path it was written under.
	if _, err := Open(p, Options{Tree: "other"}); err == nil || !strings.HasSuffix(err.Error(), `no tree "other"; the file's top level has the trees events`) || strings.Contains(err.Error(), ".tmp-") {
		t.Errorf("wrong tree: %v", err)
	}
	junk := filepath.Join(dir, "junk.parquet")
	os.WriteFile(junk, []byte("this is not parquet at all"), 0o644)
	if _, err := Open(junk, Options{}); err == nil || !strings.Contains(err.Error(), junk) {
		t.Errorf("junk parquet: %v", err)
	}
}

func TestFormatOf(t *testing.T) {
	for p, want := range map[string]Format{"a.root": FormatROOT, "B.ROOT": FormatROOT, "c.parquet": FormatParquet,
		"d.pq": FormatParquet, "e.csv": FormatCSV, "f.txt": FormatUnknown, "root": FormatUnknown} {
		if got := FormatOf(p); got != want {
			t.Errorf("FormatOf(%q) = %v, want %v", p, got, want)
		}
	}
}

// TestParquetCodecs reads DOUBLE columns compressed with each codec that
// parquet-go registers, and a DELTA_BINARY_PACKED INT64 column. LZ4_RAW must
// be refused: parquet-go v0.32.0 does not round-trip its own LZ4_RAW DOUBLE
// pages (its GenericReader reads zeros back too, although the codec alone
// round-trips), so reading them would give wrong numbers silently.
func TestParquetCodecs(t *testing.T) {
	type row struct {
		X float64 `parquet:"x"`
		N int64   `parquet:"n,delta"`
	}
	rows := make([]row, 3000)
	for k := range rows {
		rows[k] = row{X: math.Sqrt(float64(k)), N: int64(k*k) - 5}
	}
	for name, codec := range map[string]compress.Codec{
		"uncompressed": &parquet.Uncompressed, "snappy": &parquet.Snappy, "gzip": &parquet.Gzip,
		"brotli": &parquet.Brotli, "zstd": &parquet.Zstd, "lz4raw": &parquet.Lz4Raw,
	} {
		path := filepath.Join(t.TempDir(), name+".parquet")
		f, err := os.Create(path)
		if err != nil {
			t.Fatal(err)
		}
		w := parquet.NewGenericWriter[row](f, parquet.Compression(codec), parquet.PageBufferSize(4096))
		if _, err := w.Write(rows); err != nil {
			t.Fatal(err)
		}
		w.Close()
		f.Close()
		src, err := Open(path, Options{})
		if err != nil {
			t.Fatalf("%s: %v", name, err)
		}
		if name == "lz4raw" {
			err := src.Read(context.Background(), []string{"x"}, 512, func(*Batch) error { return nil })
			if err == nil || !strings.Contains(err.Error(), "LZ4_RAW-compressed") {
				t.Errorf("LZ4_RAW column: error %v", err)
			}
			src.Close()
			continue
		}
		got := readAll(t, src, []string{"n", "x"}, 512)
		src.Close()
		for k, r := range rows {
			if got[0][k] != float64(r.N) || got[1][k] != r.X {
				t.Fatalf("%s: row %d: %v %v, want %v %v", name, k, got[0][k], got[1][k], r.N, r.X)
			}
		}
	}
}

// TestROOTParallel checks that parallel decoding, in chunks that do not
// line up with baskets or batches, delivers exactly what the sequential
// reader delivers, and that errors, cancellation and damaged files behave
// the same.
func TestROOTParallel(t *testing.T) {
	defer func(c int64) { rootChunk = c }(rootChunk)
	rootChunk = 777
	dir := t.TempDir()
	names, cols := sampleColumns(20000)
	path := filepath.Join(dir, "par.root")
	if err := eventfile.WriteROOT(path, "events", names, cols); err != nil {
		t.Fatal(err)
	}
	order := []string{"y_true", "pt_reco", "y_true", "weight"}
	want := [][]float64{cols[2], cols[1], cols[2], cols[3]}
	for _, workers := range []int{1, 2, 3, 8} {
		src, err := Open(path, Options{Workers: workers})
		if err != nil {
			t.Fatal(err)
		}
		for _, bs := range []int{1000, 4096, 100000} {
			got := readAll(t, src, order, bs)
			for c := range order {
				if i, ok := sameBits(got[c], want[c]); !ok {
					t.Fatalf("workers %d batch %d: column %s differs at %d", workers, bs, order[c], i)
				}
			}
		}
		stop := errors.New("stop")
		calls := 0
		err = src.Read(context.Background(), order, 500, func(*Batch) error {
			if calls++; calls == 7 {
				return stop
			}
			return nil
		})
		if err != stop || calls != 7 {
			t.Errorf("workers %d: error %v after %d calls", workers, err, calls)
		}
		ctx, cancel := context.WithCancel(context.Background())
		calls = 0
		err = src.Read(ctx, order, 500, func(*Batch) error {
			if calls++; calls == 5 {
				cancel()
			}
			return nil
		})
		if !errors.Is(err, context.Canceled) || calls != 5 {
			t.Errorf("workers %d: cancelled: error %v after %d calls", workers, err, calls)
		}
		src.Close()
	}
	data, _ := os.ReadFile(path)
	cut := filepath.Join(dir, "cut.root")
	os.WriteFile(cut, data[:len(data)*3/5], 0o644)
	src, err := Open(cut, Options{Workers: 3})
	if err == nil {
		err = src.Read(context.Background(), names, 1000, func(*Batch) error { return nil })
		src.Close()
	}
	if err == nil || !strings.Contains(err.Error(), cut) {
		t.Errorf("truncated file, parallel read: %v", err)
	}
}

// TestROOTNtuple reads groot/testdata/tntuple.root, written by ROOT from
// go-hep's gen-tntuple.go macro: TNtuple("ntup", ..., "x:y") filled with
// (i, i+0.5) for i = 0..9, float branches.
func TestROOTNtuple(t *testing.T) {
	path := filepath.Join(hepDir(t), "groot", "testdata", "tntuple.root")
	src, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	got := readAll(t, src, []string{"y", "x"}, 3)
	for i := range 10 {
		if got[0][i] != float64(i)+0.5 || got[1][i] != float64(i) {
			t.Fatalf("entry %d: x %v y %v", i, got[1][i], got[0][i])
		}
	}
}

// TestROOTTreeChoice: a file with two trees needs the tree named; a tree in
// a directory is reached by its path.
func TestROOTTreeChoice(t *testing.T) {
	path := filepath.Join(t.TempDir(), "two.root")
	f, err := groot.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	var x float64
	for _, name := range []string{"sim", "data"} {
		w, err := rtree.NewWriter(f, name, []rtree.WriteVar{{Name: "x", Value: &x}})
		if err != nil {
			t.Fatal(err)
		}
		for i := range 3 {
			x = float64(i) + b2f(name == "data")*10
			w.Write()
		}
		w.Close()
	}
	dir, err := riofs.Dir(f).Mkdir("sub")
	if err != nil {
		t.Fatal(err)
	}
	w, err := rtree.NewWriter(dir, "deep", []rtree.WriteVar{{Name: "x", Value: &x}})
	if err != nil {
		t.Fatal(err)
	}
	x = 42
	w.Write()
	w.Close()
	f.Close()

	if _, err := Open(path, Options{}); err == nil || !strings.Contains(err.Error(), "2 trees (sim, data); say which one to read") {
		t.Errorf("two trees, none named: %v", err)
	}
	for tree, want := range map[string][]float64{"data": {10, 11, 12}, "sim": {0, 1, 2}, "sub/deep": {42}} {
		src, err := Open(path, Options{Tree: tree})
		if err != nil {
			t.Fatalf("tree %s: %v", tree, err)
		}
		if got := readAll(t, src, []string{"x"}, 2); !reflect.DeepEqual(got[0], want) {
			t.Errorf("tree %s: %v, want %v", tree, got[0], want)
		}
		src.Close()
	}
	if _, err := Open(path, Options{Tree: "sub"}); err == nil || !strings.Contains(err.Error(), `"sub" is a TDirectoryFile, not a TTree`) {
		t.Errorf("a directory named as the tree: %v", err)
	}

	// A file whose only tree is in a directory: the path must be given.
	deep := filepath.Join(t.TempDir(), "deep.root")
	f, err = groot.Create(deep)
	if err != nil {
		t.Fatal(err)
	}
	if dir, err = riofs.Dir(f).Mkdir("sub"); err != nil {
		t.Fatal(err)
	}
	if w, err = rtree.NewWriter(dir, "deep", []rtree.WriteVar{{Name: "x", Value: &x}}); err != nil {
		t.Fatal(err)
	}
	w.Write()
	w.Close()
	f.Close()
	if _, err := Open(deep, Options{}); err == nil || !strings.Contains(err.Error(), "no TTree at the top level of the file; give the tree's path") {
		t.Errorf("no tree at the top level: %v", err)
	}
}

// TestNoColumns: reading no column still delivers the events' count.
func TestNoColumns(t *testing.T) {
	dir := t.TempDir()
	names, cols := sampleColumns(2345)
	for _, file := range []string{"n.root", "n.parquet", "n.csv"} {
		src := writeOpen(t, filepath.Join(dir, file), names, cols)
		var n int64
		err := src.Read(context.Background(), nil, 1000, func(b *Batch) error {
			if b.Start != n || len(b.Cols) != 0 {
				t.Fatalf("%s: batch at %d with %d columns, want %d and 0", file, b.Start, len(b.Cols), n)
			}
			n += int64(b.Len)
			return nil
		})
		if err != nil || n != 2345 {
			t.Errorf("%s: %d events, error %v", file, n, err)
		}
		src.Close()
	}
}
