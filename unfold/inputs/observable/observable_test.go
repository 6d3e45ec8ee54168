package observable

import (
	"errors"
	"math"
	"math/rand/v2"
	"strings"
	"testing"
)

var testCols = []string{"px", "py", "pz", "e", "y", "pt", "pass_reco", "w", "jet.pt", "p T"}

// ref are expressions with their reference: the same formula written in
// plain Go with the standard library's math package.
var ref = []struct {
	src string
	f   func(px, py, pz, e, y, pt, pass, w float64) float64
}{
	{"sqrt(px*px+py*py)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return math.Sqrt(px*px + py*py) }},
	{"abs(y)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return math.Abs(y) }},
	{"-px + 2*py - pz/3", func(px, py, pz, e, y, pt, pass, w float64) float64 { return -px + 2*py - pz/3 }},
	{"(px - 1) * (py + 2.5) / (1 - pz)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return (px - 1) * (py + 2.5) / (1 - pz) }},
	{"3 / px", func(px, py, pz, e, y, pt, pass, w float64) float64 { return 3 / px }},
	{"px / 3", func(px, py, pz, e, y, pt, pass, w float64) float64 { return px / 3 }},
	{"pass_reco && pt > 20", func(px, py, pz, e, y, pt, pass, w float64) float64 { return b2f(pass != 0 && pt > 20) }},
	{"w && px", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return b2f(w != 0 && !math.IsNaN(w) && px != 0 && !math.IsNaN(px))
	}},
	{"w || !px", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return b2f((w != 0 && !math.IsNaN(w)) || !(px != 0 && !math.IsNaN(px)))
	}},
	{"where(w, 1, 2)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		if w != 0 && !math.IsNaN(w) {
			return 1
		}
		return 2
	}},
	{"pass_reco > 0.5 && (pt >= 20 || abs(y) < 1)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return b2f(pass > 0.5 && (pt >= 20 || math.Abs(y) < 1))
	}},
	{"!(px < py) || pz <= 0.25", func(px, py, pz, e, y, pt, pass, w float64) float64 { return b2f(!(px < py) || pz <= 0.25) }},
	{"20 < pt", func(px, py, pz, e, y, pt, pass, w float64) float64 { return b2f(20 < pt) }},
	{"1 >= pass_reco", func(px, py, pz, e, y, pt, pass, w float64) float64 { return b2f(1 >= pass) }},
	{"pass_reco == 1", func(px, py, pz, e, y, pt, pass, w float64) float64 { return b2f(pass == 1) }},
	{"px != py", func(px, py, pz, e, y, pt, pass, w float64) float64 { return b2f(px != py) }},
	// pt and floor(abs(px)) are often equal, so ties tell == <= > >= apart;
	// w and px hold NaN in some rows.
	{"(pt == floor(abs(px))) + 2*(pt <= floor(abs(px))) + 4*(pt > floor(abs(px))) + 8*(pt >= floor(abs(px))) + 16*(w >= py) + 32*(pass_reco != 0.5)",
		func(px, py, pz, e, y, pt, pass, w float64) float64 {
			q := math.Floor(math.Abs(px))
			return b2f(pt == q) + 2*b2f(pt <= q) + 4*b2f(pt > q) + 8*b2f(pt >= q) + 16*b2f(w >= py) + 32*b2f(pass != 0.5)
		}},
	{"!pass_reco", func(px, py, pz, e, y, pt, pass, w float64) float64 { return b2f(pass == 0) }},
	{"atan2(py, px)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return math.Atan2(py, px) }},
	{"hypot(px, py)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return math.Hypot(px, py) }},
	{"pow(abs(px), 1.5) + pow(py, 2)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Pow(math.Abs(px), 1.5) + math.Pow(py, 2)
	}},
	{"min(px, py, pz)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return min(px, py, pz) }},
	{"max(px, 0)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return max(px, 0) }},
	{"exp(-abs(y)) * log(1 + px*px)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Exp(-math.Abs(y)) * math.Log(1+px*px)
	}},
	{"log10(abs(px) + 1) + log2(abs(py) + 1)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Log10(math.Abs(px)+1) + math.Log2(math.Abs(py)+1)
	}},
	{"floor(px) + ceil(py) + round(pz) + trunc(y)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Floor(px) + math.Ceil(py) + math.Round(pz) + math.Trunc(y)
	}},
	{"cosh(y) - sinh(y) + tanh(px)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Cosh(y) - math.Sinh(y) + math.Tanh(px)
	}},
	{"asinh(px) + acosh(1 + abs(py)) + atanh(y / 10)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Asinh(px) + math.Acosh(1+math.Abs(py)) + math.Atanh(y/10)
	}},
	{"sin(px) * cos(py) + tan(pz)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Sin(px)*math.Cos(py) + math.Tan(pz)
	}},
	{"asin(y/10) + acos(y/10) + atan(px)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Asin(y/10) + math.Acos(y/10) + math.Atan(px)
	}},
	{"0.5 * log((e + pz) / (e - pz))", func(px, py, pz, e, y, pt, pass, w float64) float64 { return 0.5 * math.Log((e+pz)/(e-pz)) }},
	{"where(px > 0, sqrt(px), -1)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		if px > 0 {
			return math.Sqrt(px)
		}
		return -1
	}},
	{"px % 3 + mod(py, 0.7)", func(px, py, pz, e, y, pt, pass, w float64) float64 { return math.Mod(px, 3) + math.Mod(py, 0.7) }},
	{"1/2 + 2*3 + px", func(px, py, pz, e, y, pt, pass, w float64) float64 { return 0.5 + 6 + px }},
	{"pi * px + 1e-3 - 0x10 + 1_000", func(px, py, pz, e, y, pt, pass, w float64) float64 { return math.Pi*px + 1e-3 - 16 + 1000 }},
	{"cbrt(px) + expm1(y/10) + log1p(abs(py))", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		return math.Cbrt(px) + math.Expm1(y/10) + math.Log1p(math.Abs(py))
	}},
	{"sign(px) + isnan(w) + isinf(w)", func(px, py, pz, e, y, pt, pass, w float64) float64 {
		s := 0.0
		switch {
		case px > 0:
			s = 1
		case px < 0:
			s = -1
		default:
			s = px
		}
		return s + b2f(math.IsNaN(w)) + b2f(math.IsInf(w, 0))
	}},
	{"w", func(px, py, pz, e, y, pt, pass, w float64) float64 { return w }},
	{"+(((w)))", func(px, py, pz, e, y, pt, pass, w float64) float64 { return w }},
	{"42", func(px, py, pz, e, y, pt, pass, w float64) float64 { return 42 }},
}

// randomColumns draws n rows of test inputs, with NaN, ±Inf, zeros and
// exact edge values mixed in.
func randomColumns(n int, seed uint64) [][]float64 {
	rng := rand.New(rand.NewPCG(seed, 7))
	cols := make([][]float64, len(testCols))
	for c := range cols {
		cols[c] = make([]float64, n)
	}
	for k := range n {
		px, py, pz := rng.NormFloat64()*30, rng.NormFloat64()*30, rng.NormFloat64()*50
		cols[0][k], cols[1][k], cols[2][k] = px, py, pz
		cols[3][k] = math.Sqrt(px*px+py*py+pz*pz+rng.Float64()*100) + 0.1
		cols[4][k] = rng.Float64()*10 - 5
		cols[5][k] = math.Floor(rng.Float64() * 40) // many values equal to 20 exactly
		cols[6][k] = float64(rng.IntN(3)) / 2       // 0, 0.5, 1
		cols[7][k] = rng.NormFloat64()
		switch rng.IntN(40) {
		case 0:
			cols[7][k] = math.NaN()
		case 1:
			cols[7][k] = math.Inf(1)
		case 2:
			cols[7][k] = math.Inf(-1)
		case 3:
			cols[0][k] = 0
		case 4:
			cols[0][k] = math.NaN()
		}
	}
	return cols
}

// same reports whether a and b agree: both NaN, or equal, or within 4 ulp
// (a compiler may fuse multiply-adds differently in the two code paths).
func same(a, b float64) bool {
	if a == b || (a != a && b != b) {
		return true
	}
	return math.Abs(a-b) <= 4*0x1p-52*max(math.Abs(a), math.Abs(b))
}

func TestAgainstGoMath(t *testing.T) {
	const n = 3*ChunkSize + 77 // several chunks and a partial one
	cols := randomColumns(n, 1)
	got := make([]float64, n)
	row := make([]float64, len(testCols))
	for _, tc := range ref {
		e, err := Compile(tc.src, testCols)
		if err != nil {
			t.Fatalf("Compile(%q): %v", tc.src, err)
		}
		e.Eval(got, cols)
		for k := range n {
			for c := range row {
				row[c] = cols[c][k]
			}
			want := tc.f(row[0], row[1], row[2], row[3], row[4], row[5], row[6], row[7])
			if !same(got[k], want) {
				t.Fatalf("%q row %d %v: Eval = %v, Go = %v", tc.src, k, row, got[k], want)
			}
			if r := e.EvalRow(row); !same(r, want) {
				t.Fatalf("%q row %d %v: EvalRow = %v, Go = %v", tc.src, k, row, r, want)
			}
		}
	}
}

func TestColumnsUsed(t *testing.T) {
	for _, tc := range []struct {
		src  string
		want []string
	}{
		{"sqrt(py*py+px*px)", []string{"px", "py"}},
		{"pass_reco && pt > 20", []string{"pt", "pass_reco"}},
		{"2*pi", nil},
		{`col("jet.pt") * 2 + col("p T") + px`, []string{"px", "jet.pt", "p T"}},
		{"w*w*w", []string{"w"}},
	} {
		e := MustCompile(tc.src, testCols)
		got := e.ColumnNames()
		if strings.Join(got, ",") != strings.Join(tc.want, ",") {
			t.Errorf("%q: columns %v, want %v", tc.src, got, tc.want)
		}
		for i := 1; i < len(e.Columns()); i++ {
			if e.Columns()[i] <= e.Columns()[i-1] {
				t.Errorf("%q: Columns not increasing: %v", tc.src, e.Columns())
			}
		}
	}
	if v, ok := MustCompile("2*pi", testCols).Const(); !ok || v != 2*math.Pi {
		t.Errorf("Const of 2*pi = %v, %v", v, ok)
	}
}

func TestEvalOnlyUsedColumns(t *testing.T) {
	e := MustCompile("px + 1", testCols)
	cols := make([][]float64, len(testCols)) // all nil but px
	cols[0] = []float64{1, 2, 3}
	dst := make([]float64, 3)
	e.Eval(dst, cols)
	if dst[0] != 2 || dst[2] != 4 {
		t.Errorf("got %v", dst)
	}
}

func TestEvalAliasDst(t *testing.T) {
	const n = 2*ChunkSize + 5
	cols := randomColumns(n, 2)
	for _, src := range []string{"sqrt(px*px+py*py)", "px", "px*2 + px"} {
		e := MustCompile(src, testCols)
		want := make([]float64, n)
		e.Eval(want, cols)
		alias := append([]float64(nil), cols[0]...)
		in := append([][]float64(nil), cols...)
		in[0] = alias
		e.Eval(alias, in)
		for k := range n {
			if !same(alias[k], want[k]) {
				t.Fatalf("%q: aliased dst differs at %d: %v vs %v", src, k, alias[k], want[k])
			}
		}
	}
}

func TestCloneIndependent(t *testing.T) {
	e := MustCompile("sqrt(px*px+py*py) + pz", testCols)
	c := e.Clone()
	a := randomColumns(100, 3)
	b := randomColumns(100, 4)
	da, db, dc := make([]float64, 100), make([]float64, 100), make([]float64, 100)
	e.Eval(da, a)
	c.Eval(db, b)
	e.Eval(dc, b)
	for k := range dc {
		if !same(db[k], dc[k]) {
			t.Fatalf("clone differs at %d", k)
		}
	}
	done := make(chan []float64)
	for _, x := range []*Expr{e, c} {
		go func(x *Expr) {
			d := make([]float64, 100)
			for range 200 {
				x.Eval(d, a)
			}
			done <- d
		}(x)
	}
	r1, r2 := <-done, <-done
	for k := range r1 {
		if !same(r1[k], da[k]) || !same(r2[k], da[k]) {
			t.Fatalf("concurrent clones disagree at %d", k)
		}
	}
}

func TestEvalNoAllocs(t *testing.T) {
	e := MustCompile("where(pass_reco && pt > 20, sqrt(px*px+py*py), -1)", testCols)
	cols := randomColumns(2000, 5)
	dst := make([]float64, 2000)
	if a := testing.AllocsPerRun(20, func() { e.Eval(dst, cols) }); a != 0 {
		t.Errorf("Eval allocates %v times per call", a)
	}
	row := make([]float64, len(testCols))
	if a := testing.AllocsPerRun(20, func() { e.EvalRow(row) }); a != 0 {
		t.Errorf("EvalRow allocates %v times per call", a)
	}
}

func TestEvalShortColumnPanics(t *testing.T) {
	e := MustCompile("px + py", testCols)
	defer func() {
		if recover() == nil {
			t.Error("no panic for a short column")
		}
	}()
	cols := make([][]float64, len(testCols))
	cols[0] = make([]float64, 10)
	cols[1] = make([]float64, 9)
	e.Eval(make([]float64, 10), cols)
}

func TestErrors(t *testing.T) {
	for _, tc := range []struct {
		src  string
		at   string // the offending token; its position is the expected column
		want string
	}{
		{"sqrt(px*px+pz2*pz2)", "pz2", `unknown column "pz2"; did you mean "pz"?`},
		{"px + qqqqqqq", "qqqqqqq", `unknown column "qqqqqqq" (columns: px, py`},
		{"px + sqr(py)", "sqr", `unknown function "sqr"`},
		{"hypot(px)", "hypot", "hypot takes 2 arguments, got 1"},
		{"abs(px, py)", "abs", "abs takes 1 argument, got 2"},
		{"min(px)", "min", "min takes at least 2 arguments, got 1"},
		{"px +* py", "*", "unexpected *: a product needs two operands"},
		{"px py", "py", "syntax error"},
		{"px + ", "", "syntax error"},
		{"(px + py", "", "syntax error"},
		{"px ^ 2", "^", "operator ^ is not supported; for powers use pow(x, y)"},
		{"px << 2", "<<", "operator << is not supported"},
		// Operators of other languages get the one meant (common practice:
		// Python's and/or/not and **, C's bitwise & and |).
		{"px ** 2", "**", "operator ** is not supported; for powers use pow(x, y)"},
		{"px > 1 & py < 2", "&", "operator & is not supported; for a logical and use &&"},
		{"px > 1 | py < 2", "|", "operator | is not supported; for a logical or use ||"},
		{"px > 1 and py < 2", "and", `"and" is not an operator: write && for and, || for or, ! for not`},
		{"px > 1 or py < 2", "or", `"or" is not an operator`},
		{"not px", "px", `"not" is not an operator`},
		{`px + "a"`, `"a"`, "string literals are not supported"},
		{"jet.pt > 1", "jet", "selectors"},
		{"px[0]", "px", "indexing is not supported"},
		{"sqrt + 1", "sqrt", "sqrt is a function"},
		{"math.Sqrt(px)", "math", "only calls of named functions"},
		{`col("jet.eta")`, `"jet.eta"`, `unknown column "jet.eta"; did you mean "jet.pt"?`},
		{"col(px)", "px", "col needs a quoted column name"},
		{`col("a", "b")`, "col", "col takes 1 argument"},
		{"2i * px", "2i", "imag literals are not supported"},
		{"&px", "&", "operator & is not supported"},
		{"   ", "", "empty expression"},
		{"min(px, py...)", "...", "... is not supported"},
	} {
		_, err := Compile(tc.src, testCols)
		var e *Error
		if !errors.As(err, &e) {
			t.Errorf("%q: error %v is not an *Error", tc.src, err)
			continue
		}
		if !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%q: error %q does not contain %q", tc.src, err, tc.want)
		}
		if tc.at != "" {
			if wantCol := strings.Index(tc.src, tc.at) + 1; e.Column() != wantCol {
				t.Errorf("%q: error at column %d, want %d (%q): %v", tc.src, e.Column(), wantCol, tc.at, err)
			}
		}
	}
	if _, err := Compile("px", []string{"px", "px"}); err == nil {
		t.Error("duplicate column names accepted")
	}
}

func TestErrorLineColumn(t *testing.T) {
	_, err := Compile("px +\n  bogus", testCols)
	var e *Error
	if !errors.As(err, &e) {
		t.Fatal(err)
	}
	if e.Line() != 2 || e.Column() != 3 {
		t.Errorf("line %d column %d, want 2, 3: %v", e.Line(), e.Column(), err)
	}
	if !strings.Contains(err.Error(), "line 2, column 3") {
		t.Errorf("message %q", err)
	}
}

func TestFunctionsListed(t *testing.T) {
	list := Functions()
	if len(list) != len(funcs) {
		t.Fatalf("%d functions listed, %d known", len(list), len(funcs))
	}
	for _, f := range list {
		if !strings.HasPrefix(f[1], f[0]+"(") {
			t.Errorf("doc of %s is %q", f[0], f[1])
		}
	}
}

func benchEval(b *testing.B, src string) {
	const n = 4096
	cols := randomColumns(n, 9)
	e := MustCompile(src, testCols)
	dst := make([]float64, n)
	b.ResetTimer()
	for range b.N {
		e.Eval(dst, cols)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/n, "ns/row")
}

func BenchmarkEval(b *testing.B) {
	for _, bc := range []struct{ name, src string }{
		{"pt", "sqrt(px*px+py*py)"},
		{"absy", "abs(y)"},
		{"selection", "pass_reco && pt > 20"},
		{"rapidity", "0.5*log((e+pz)/(e-pz))"},
		{"where", "where(pass_reco && pt > 20, sqrt(px*px+py*py), -1)"},
	} {
		b.Run(bc.name, func(b *testing.B) { benchEval(b, bc.src) })
	}
}

func BenchmarkEvalRow(b *testing.B) {
	cols := randomColumns(1024, 9)
	rows := make([][]float64, 1024)
	for k := range rows {
		rows[k] = make([]float64, len(testCols))
		for c := range testCols {
			rows[k][c] = cols[c][k]
		}
	}
	e := MustCompile("sqrt(px*px+py*py)", testCols)
	var s float64
	b.ResetTimer()
	for i := range b.N {
		s += e.EvalRow(rows[i&1023])
	}
	_ = s
}

var benchSink float64

// BenchmarkGoReference is plain Go for the pt expression, the floor.
func BenchmarkGoReference(b *testing.B) {
	const n = 4096
	cols := randomColumns(n, 9)
	px, py := cols[0], cols[1]
	dst := make([]float64, n)
	for range b.N {
		for k := range dst {
			dst[k] = math.Sqrt(px[k]*px[k] + py[k]*py[k])
		}
	}
	benchSink = dst[n/2]
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/n, "ns/row")
}
