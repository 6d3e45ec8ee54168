package observable

import (
	"errors"
	"fmt"
	"go/ast"
	"go/constant"
	"go/parser"
	"go/scanner"
	"go/token"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"
)

// ChunkSize is the number of rows that Eval processes per pass through the
// expression tree. Scratch buffers hold ChunkSize values per node.
const ChunkSize = 512

// Expr is a compiled expression. It is not safe for concurrent use; see Clone.
type Expr struct {
	src   string
	names []string
	used  []int
	tree  *term
	row   func([]float64) float64

	root *bnode
	view [][]float64
}

// Error is a problem found while compiling an expression.
type Error struct {
	Expr   string // the expression text
	Offset int    // 0-based byte offset of the offending token in Expr
	Msg    string
}

// Line and Column give the 1-based position of the offending token.
func (e *Error) Line() int { return 1 + strings.Count(e.Expr[:min(e.Offset, len(e.Expr))], "\n") }

// Column gives the 1-based column (in bytes) of the offending token on its line.
func (e *Error) Column() int {
	off := min(e.Offset, len(e.Expr))
	return off - strings.LastIndexByte(e.Expr[:off], '\n')
}

func (e *Error) Error() string {
	if strings.Contains(e.Expr, "\n") {
		return fmt.Sprintf("expression %q: line %d, column %d: %s", e.Expr, e.Line(), e.Column(), e.Msg)
	}
	return fmt.Sprintf("expression %q: column %d: %s", e.Expr, e.Column(), e.Msg)
}

// opHints adds to the refusal of an operator of Go that the language
// lacks the operator meant, as people write it in other languages.
var opHints = map[token.Token]string{
	token.XOR: "; for powers use pow(x, y)",
	token.AND: "; for a logical and use &&",
	token.OR:  "; for a logical or use ||",
}

// wordOps finds the words other languages use as logical operators,
// named in the hint of a syntax error.
var wordOps = regexp.MustCompile(`\b(and|or|not)\b`)

// Compile parses src and binds its identifiers to columns, the names of the
// input columns in the order in which Eval and EvalRow receive them.
func Compile(src string, columns []string) (*Expr, error) {
	index := make(map[string]int, len(columns))
	for i, n := range columns {
		if _, dup := index[n]; dup {
			return nil, fmt.Errorf("expression %q: column name %q is given twice", src, n)
		}
		index[n] = i
	}
	if strings.TrimSpace(src) == "" {
		return nil, &Error{Expr: src, Msg: "empty expression"}
	}
	fset := token.NewFileSet()
	x, err := parser.ParseExprFrom(fset, "", src, 0)
	if err != nil {
		var el scanner.ErrorList
		if errors.As(err, &el) && len(el) > 0 {
			msg := "syntax error: " + el[0].Msg
			if w := wordOps.FindString(src); w != "" {
				msg += fmt.Sprintf("; %q is not an operator: write && for and, || for or, ! for not", w)
			}
			return nil, &Error{Expr: src, Offset: el[0].Pos.Offset, Msg: msg}
		}
		return nil, &Error{Expr: src, Msg: "syntax error: " + err.Error()}
	}
	c := compiler{src: src, fset: fset, names: columns, index: index, used: map[int]bool{}}
	t, err := c.term(x)
	if err != nil {
		return nil, err
	}
	e := &Expr{src: src, names: slices.Clone(columns), tree: t}
	for i := range c.used {
		e.used = append(e.used, i)
	}
	slices.Sort(e.used)
	e.row = t.closure()
	e.build()
	return e, nil
}

// MustCompile is like Compile but panics on error. It is meant for
// expressions fixed in the program text.
func MustCompile(src string, columns []string) *Expr {
	e, err := Compile(src, columns)
	if err != nil {
		panic(err)
	}
	return e
}

// String returns the source text of the expression.
func (e *Expr) String() string { return e.src }

// Columns returns the indices, into the column list given to Compile, of
// the columns the expression uses, in increasing order. The caller must not
// modify the returned slice.
func (e *Expr) Columns() []int { return e.used }

// ColumnNames returns the names of the columns the expression uses, in the
// order of Columns.
func (e *Expr) ColumnNames() []string {
	out := make([]string, len(e.used))
	for i, c := range e.used {
		out[i] = e.names[c]
	}
	return out
}

// Const reports whether the expression uses no column, and then its value.
func (e *Expr) Const() (float64, bool) {
	if e.tree.op == opConst {
		return e.tree.val, true
	}
	return 0, false
}

// Clone returns an independent copy of e with its own scratch buffers, for
// use in another goroutine.
func (e *Expr) Clone() *Expr {
	c := &Expr{src: e.src, names: e.names, used: e.used, tree: e.tree, row: e.row}
	c.build()
	return c
}

// EvalRow evaluates the expression for one row; row[i] is the value of
// column i of the list given to Compile. EvalRow panics if row is shorter
// than the largest column index used. It does not allocate and is safe for
// concurrent use.
func (e *Expr) EvalRow(row []float64) float64 { return e.row(row) }

// Eval sets dst[k] to the value of the expression for row k, for every k
// in [0, len(dst)). cols[i] holds the values of column i of the list given to
// Compile; only the columns reported by Columns are read (the others may be
// nil), and each of them must have at least len(dst) values, or Eval panics.
// dst may be the very same slice as one of the columns (dst[k] is written
// after every input of row k is read); other overlaps are not allowed.
// Eval does not allocate.
func (e *Expr) Eval(dst []float64, cols [][]float64) {
	n := len(dst)
	for _, c := range e.used {
		if c >= len(cols) || len(cols[c]) < n {
			have := 0
			if c < len(cols) {
				have = len(cols[c])
			}
			panic(fmt.Sprintf("observable: column %d (%s) has %d values, need %d", c, e.names[c], have, n))
		}
	}
	for off := 0; off < n; off += ChunkSize {
		m := min(ChunkSize, n-off)
		for _, c := range e.used {
			e.view[c] = cols[c][off : off+m]
		}
		out := dst[off : off+m]
		switch e.root.op {
		case opCol:
			copy(out, e.view[e.root.col])
		case opConst:
			for k := range out {
				out[k] = e.root.val
			}
		default:
			e.root.eval(out, e.view)
		}
	}
}

// opcode identifies a node of the expression tree.
type opcode uint8

const (
	opConst opcode = iota
	opCol
	// unary
	opNeg
	opNot
	opAbs
	opSqrt
	opFloor
	opCeil
	opFunc1 // generic func(float64) float64
	// binary, both operands vectors
	opAdd
	opSub
	opMul
	opDiv
	opMod
	opEq
	opNe
	opLt
	opLe
	opGt
	opGe
	opAnd
	opOr
	opMin
	opMax
	opFunc2 // generic func(float64, float64) float64
	// binary, right operand constant (left for opKSub, opKDiv)
	opAddK
	opSubK
	opKSub
	opMulK
	opDivK
	opKDiv
	opEqK
	opNeK
	opLtK
	opLeK
	opGtK
	opGeK
	// ternary
	opWhere
)

// term is the compiled, immutable form of an expression.
type term struct {
	op   opcode
	val  float64                        // opConst, or the constant of a ...K op
	col  int                            // opCol
	f1   func(float64) float64          // opFunc1
	f2   func(float64, float64) float64 // opFunc2
	args []*term
}

type funcDef struct {
	nargs int // -2: two or more
	op    opcode
	f1    func(float64) float64          // for opFunc1
	f2    func(float64, float64) float64 // for opFunc2
	doc   string
}

// Functions lists the functions an expression may call, with a one-line
// description each, in alphabetical order.
func Functions() [][2]string {
	out := make([][2]string, 0, len(funcs))
	for name, f := range funcs {
		out = append(out, [2]string{name, f.doc})
	}
	slices.SortFunc(out, func(a, b [2]string) int { return strings.Compare(a[0], b[0]) })
	return out
}

var funcs = map[string]funcDef{
	"abs":   {nargs: 1, op: opAbs, doc: "abs(x): absolute value"},
	"sqrt":  {nargs: 1, op: opSqrt, doc: "sqrt(x): square root (NaN for x < 0)"},
	"cbrt":  {nargs: 1, op: opFunc1, f1: math.Cbrt, doc: "cbrt(x): cube root"},
	"exp":   {nargs: 1, op: opFunc1, f1: math.Exp, doc: "exp(x): e to the power x"},
	"expm1": {nargs: 1, op: opFunc1, f1: math.Expm1, doc: "expm1(x): exp(x)-1, accurate for small x"},
	"log":   {nargs: 1, op: opFunc1, f1: math.Log, doc: "log(x): natural logarithm"},
	"log10": {nargs: 1, op: opFunc1, f1: math.Log10, doc: "log10(x): decimal logarithm"},
	"log2":  {nargs: 1, op: opFunc1, f1: math.Log2, doc: "log2(x): binary logarithm"},
	"log1p": {nargs: 1, op: opFunc1, f1: math.Log1p, doc: "log1p(x): log(1+x), accurate for small x"},
	"sin":   {nargs: 1, op: opFunc1, f1: math.Sin, doc: "sin(x): sine (radians)"},
	"cos":   {nargs: 1, op: opFunc1, f1: math.Cos, doc: "cos(x): cosine (radians)"},
	"tan":   {nargs: 1, op: opFunc1, f1: math.Tan, doc: "tan(x): tangent (radians)"},
	"asin":  {nargs: 1, op: opFunc1, f1: math.Asin, doc: "asin(x): arc sine"},
	"acos":  {nargs: 1, op: opFunc1, f1: math.Acos, doc: "acos(x): arc cosine"},
	"atan":  {nargs: 1, op: opFunc1, f1: math.Atan, doc: "atan(x): arc tangent"},
	"sinh":  {nargs: 1, op: opFunc1, f1: math.Sinh, doc: "sinh(x): hyperbolic sine"},
	"cosh":  {nargs: 1, op: opFunc1, f1: math.Cosh, doc: "cosh(x): hyperbolic cosine"},
	"tanh":  {nargs: 1, op: opFunc1, f1: math.Tanh, doc: "tanh(x): hyperbolic tangent"},
	"asinh": {nargs: 1, op: opFunc1, f1: math.Asinh, doc: "asinh(x): inverse hyperbolic sine"},
	"acosh": {nargs: 1, op: opFunc1, f1: math.Acosh, doc: "acosh(x): inverse hyperbolic cosine"},
	"atanh": {nargs: 1, op: opFunc1, f1: math.Atanh, doc: "atanh(x): inverse hyperbolic tangent"},
	"floor": {nargs: 1, op: opFloor, doc: "floor(x): largest integer <= x"},
	"ceil":  {nargs: 1, op: opCeil, doc: "ceil(x): smallest integer >= x"},
	"round": {nargs: 1, op: opFunc1, f1: math.Round, doc: "round(x): nearest integer, halves away from zero"},
	"trunc": {nargs: 1, op: opFunc1, f1: math.Trunc, doc: "trunc(x): integer part"},
	"sign":  {nargs: 1, op: opFunc1, f1: sign, doc: "sign(x): -1, 0 or 1 (NaN for NaN)"},
	"isnan": {nargs: 1, op: opFunc1, f1: isNaN, doc: "isnan(x): 1 if x is NaN, else 0"},
	"isinf": {nargs: 1, op: opFunc1, f1: isInf, doc: "isinf(x): 1 if x is +Inf or -Inf, else 0"},
	"pow":   {nargs: 2, op: opFunc2, f2: math.Pow, doc: "pow(x, y): x to the power y"},
	"atan2": {nargs: 2, op: opFunc2, f2: math.Atan2, doc: "atan2(y, x): arc tangent of y/x in (-pi, pi]"},
	"hypot": {nargs: 2, op: opFunc2, f2: math.Hypot, doc: "hypot(x, y): sqrt(x*x+y*y) without overflow"},
	"mod":   {nargs: 2, op: opMod, doc: "mod(x, y): remainder of x/y with the sign of x (same as x % y)"},
	"min":   {nargs: -2, op: opMin, doc: "min(x, y, ...): smallest argument (NaN if any is NaN)"},
	"max":   {nargs: -2, op: opMax, doc: "max(x, y, ...): largest argument (NaN if any is NaN)"},
	"where": {nargs: 3, op: opWhere, doc: "where(c, a, b): a where c is true (neither 0 nor NaN), else b"},
}

func sign(x float64) float64 {
	switch {
	case x > 0:
		return 1
	case x < 0:
		return -1
	}
	return x // 0, -0 or NaN
}

func isNaN(x float64) float64 { return b2f(x != x) }
func isInf(x float64) float64 { return b2f(math.IsInf(x, 0)) }

// truth is the logical value of x: true when x is neither 0 nor NaN.
func truth(x float64) bool { return math.Abs(x) > 0 }

func b2f(b bool) float64 {
	// Through an integer, which the compiler sets without a branch
	// (SETcc): comparisons on unordered data then cost no mispredictions.
	var i int
	if b {
		i = 1
	}
	return float64(i)
}

type compiler struct {
	src   string
	fset  *token.FileSet
	names []string
	index map[string]int
	used  map[int]bool
}

func (c *compiler) errf(pos token.Pos, format string, a ...any) error {
	off := 0
	if pos.IsValid() {
		off = c.fset.Position(pos).Offset
	}
	return &Error{Expr: c.src, Offset: off, Msg: fmt.Sprintf(format, a...)}
}

func (c *compiler) term(x ast.Expr) (*term, error) {
	switch x := x.(type) {
	case *ast.ParenExpr:
		return c.term(x.X)
	case *ast.BasicLit:
		switch x.Kind {
		case token.INT, token.FLOAT:
			v := constant.MakeFromLiteral(x.Value, x.Kind, 0)
			if v.Kind() == constant.Unknown {
				return nil, c.errf(x.Pos(), "bad number %s", x.Value)
			}
			f, _ := constant.Float64Val(constant.ToFloat(v))
			return &term{op: opConst, val: f}, nil
		default:
			hint := ""
			if x.Kind == token.STRING {
				hint = fmt.Sprintf(`; for a column whose name is not an identifier write col(%s)`, x.Value)
			}
			return nil, c.errf(x.Pos(), "%s literals are not supported; only numbers%s", strings.ToLower(x.Kind.String()), hint)
		}
	case *ast.Ident:
		if i, ok := c.index[x.Name]; ok {
			c.used[i] = true
			return &term{op: opCol, col: i}, nil
		}
		if x.Name == "pi" {
			return &term{op: opConst, val: math.Pi}, nil
		}
		if _, isFunc := funcs[x.Name]; isFunc {
			return nil, c.errf(x.Pos(), "%s is a function; call it as %s(...)", x.Name, x.Name)
		}
		return nil, c.errf(x.Pos(), "unknown column %q%s", x.Name, c.suggest(x.Name))
	case *ast.UnaryExpr:
		a, err := c.term(x.X)
		if err != nil {
			return nil, err
		}
		switch x.Op {
		case token.ADD:
			return a, nil
		case token.SUB:
			return fold(&term{op: opNeg, args: []*term{a}}), nil
		case token.NOT:
			return fold(&term{op: opNot, args: []*term{a}}), nil
		}
		return nil, c.errf(x.OpPos, "operator %s is not supported", x.Op)
	case *ast.BinaryExpr:
		op, ok := binops[x.Op]
		if !ok {
			hint := opHints[x.Op]
			return nil, c.errf(x.OpPos, "operator %s is not supported%s", x.Op, hint)
		}
		a, err := c.term(x.X)
		if err != nil {
			return nil, err
		}
		b, err := c.term(x.Y)
		if err != nil {
			return nil, err
		}
		return fold(&term{op: op, args: []*term{a, b}}), nil
	case *ast.CallExpr:
		id, ok := x.Fun.(*ast.Ident)
		if !ok {
			return nil, c.errf(x.Fun.Pos(), "only calls of named functions are supported")
		}
		if id.Name == "col" {
			return c.quotedColumn(x)
		}
		f, ok := funcs[id.Name]
		if !ok {
			return nil, c.errf(id.Pos(), "unknown function %q (known: %s)", id.Name, funcNames())
		}
		if x.Ellipsis.IsValid() {
			return nil, c.errf(x.Ellipsis, "... is not supported")
		}
		n := len(x.Args)
		switch {
		case f.nargs == -2 && n < 2:
			return nil, c.errf(id.Pos(), "%s takes at least 2 arguments, got %d", id.Name, n)
		case f.nargs >= 0 && n != f.nargs:
			return nil, c.errf(id.Pos(), "%s takes %d argument%s, got %d", id.Name, f.nargs, plural(f.nargs), n)
		}
		args := make([]*term, n)
		for i, a := range x.Args {
			t, err := c.term(a)
			if err != nil {
				return nil, err
			}
			args[i] = t
		}
		if f.nargs == -2 {
			t := args[0]
			for _, a := range args[1:] {
				t = fold(&term{op: f.op, args: []*term{t, a}})
			}
			return t, nil
		}
		return fold(&term{op: f.op, f1: f.f1, f2: f.f2, args: args}), nil
	case *ast.SelectorExpr:
		return nil, c.errf(x.Pos(), `selectors (a.b) are not supported; for a column named "a.b" write col("a.b")`)
	case *ast.IndexExpr, *ast.IndexListExpr, *ast.SliceExpr:
		return nil, c.errf(x.Pos(), "indexing is not supported")
	case *ast.StarExpr:
		if o := c.fset.Position(x.Pos()).Offset; o > 0 && c.src[o-1] == '*' {
			return nil, c.errf(x.Pos()-1, "operator ** is not supported; for powers use pow(x, y)")
		}
		return nil, c.errf(x.Pos(), "unexpected *: a product needs two operands")
	case *ast.BadExpr:
		return nil, c.errf(x.Pos(), "syntax error")
	}
	return nil, c.errf(x.Pos(), "unsupported construct %T", x)
}

// quotedColumn compiles col("name"), the way to use a column whose name
// is not a Go identifier.
func (c *compiler) quotedColumn(x *ast.CallExpr) (*term, error) {
	if len(x.Args) != 1 {
		return nil, c.errf(x.Fun.Pos(), "col takes 1 argument (a quoted column name), got %d", len(x.Args))
	}
	lit, ok := x.Args[0].(*ast.BasicLit)
	if !ok || lit.Kind != token.STRING {
		return nil, c.errf(x.Args[0].Pos(), `col needs a quoted column name, as in col("jet.pt")`)
	}
	name, err := strconv.Unquote(lit.Value)
	if err != nil {
		return nil, c.errf(lit.Pos(), "bad quoted name %s", lit.Value)
	}
	i, ok := c.index[name]
	if !ok {
		return nil, c.errf(lit.Pos(), "unknown column %q%s", name, c.suggest(name))
	}
	c.used[i] = true
	return &term{op: opCol, col: i}, nil
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

func funcNames() string {
	names := make([]string, 0, len(funcs))
	for n := range funcs {
		names = append(names, n)
	}
	slices.Sort(names)
	return strings.Join(names, ", ")
}

// suggest proposes a close column name for a misspelt one.
func (c *compiler) suggest(name string) string {
	best, bestD := "", 3
	for _, n := range c.names {
		if d := editDistance(strings.ToLower(name), strings.ToLower(n)); d < bestD {
			best, bestD = n, d
		}
	}
	if best != "" {
		return fmt.Sprintf("; did you mean %q?", best)
	}
	if len(c.names) <= 12 {
		return fmt.Sprintf(" (columns: %s)", strings.Join(c.names, ", "))
	}
	return fmt.Sprintf(" (%d columns; first: %s, ...)", len(c.names), strings.Join(c.names[:12], ", "))
}

func editDistance(a, b string) int {
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(b)]
}

var binops = map[token.Token]opcode{
	token.ADD: opAdd, token.SUB: opSub, token.MUL: opMul, token.QUO: opDiv, token.REM: opMod,
	token.EQL: opEq, token.NEQ: opNe, token.LSS: opLt, token.LEQ: opLe, token.GTR: opGt, token.GEQ: opGe,
	token.LAND: opAnd, token.LOR: opOr,
}

// fold evaluates constant subtrees and turns binary operations with one
// constant operand into their ...K forms.
func fold(t *term) *term {
	allConst := true
	for _, a := range t.args {
		if a.op != opConst {
			allConst = false
		}
	}
	if allConst {
		return &term{op: opConst, val: t.closure()(nil)}
	}
	if len(t.args) != 2 {
		return t
	}
	a, b := t.args[0], t.args[1]
	if b.op == opConst {
		if k, ok := rightK[t.op]; ok {
			return &term{op: k, val: b.val, args: []*term{a}}
		}
	}
	if a.op == opConst {
		if k, ok := leftK[t.op]; ok {
			return &term{op: k, val: a.val, args: []*term{b}}
		}
	}
	return t
}

// rightK maps x op c to its constant form; leftK maps c op x.
var rightK = map[opcode]opcode{
	opAdd: opAddK, opSub: opSubK, opMul: opMulK, opDiv: opDivK,
	opEq: opEqK, opNe: opNeK, opLt: opLtK, opLe: opLeK, opGt: opGtK, opGe: opGeK,
}
var leftK = map[opcode]opcode{
	opAdd: opAddK, opSub: opKSub, opMul: opMulK, opDiv: opKDiv,
	opEq: opEqK, opNe: opNeK, opLt: opGtK, opLe: opGeK, opGt: opLtK, opGe: opLeK,
}

// closure builds the scalar evaluator of t.
func (t *term) closure() func([]float64) float64 {
	switch t.op {
	case opConst:
		v := t.val
		return func([]float64) float64 { return v }
	case opCol:
		i := t.col
		return func(r []float64) float64 { return r[i] }
	}
	var a, b, c func([]float64) float64
	if len(t.args) > 0 {
		a = t.args[0].closure()
	}
	if len(t.args) > 1 {
		b = t.args[1].closure()
	}
	if len(t.args) > 2 {
		c = t.args[2].closure()
	}
	k := t.val
	switch t.op {
	case opNeg:
		return func(r []float64) float64 { return -a(r) }
	case opNot:
		return func(r []float64) float64 { return b2f(!truth(a(r))) }
	case opAbs:
		return func(r []float64) float64 { return math.Abs(a(r)) }
	case opSqrt:
		return func(r []float64) float64 { return math.Sqrt(a(r)) }
	case opFloor:
		return func(r []float64) float64 { return math.Floor(a(r)) }
	case opCeil:
		return func(r []float64) float64 { return math.Ceil(a(r)) }
	case opFunc1:
		f := t.f1
		return func(r []float64) float64 { return f(a(r)) }
	case opAdd:
		return func(r []float64) float64 { return a(r) + b(r) }
	case opSub:
		return func(r []float64) float64 { return a(r) - b(r) }
	case opMul:
		return func(r []float64) float64 { return a(r) * b(r) }
	case opDiv:
		return func(r []float64) float64 { return a(r) / b(r) }
	case opMod:
		return func(r []float64) float64 { return math.Mod(a(r), b(r)) }
	case opEq:
		return func(r []float64) float64 { return b2f(a(r) == b(r)) }
	case opNe:
		return func(r []float64) float64 { return b2f(a(r) != b(r)) }
	case opLt:
		return func(r []float64) float64 { return b2f(a(r) < b(r)) }
	case opLe:
		return func(r []float64) float64 { return b2f(a(r) <= b(r)) }
	case opGt:
		return func(r []float64) float64 { return b2f(a(r) > b(r)) }
	case opGe:
		return func(r []float64) float64 { return b2f(a(r) >= b(r)) }
	case opAnd:
		return func(r []float64) float64 { x, y := a(r), b(r); return b2f(truth(x) && truth(y)) }
	case opOr:
		return func(r []float64) float64 { x, y := a(r), b(r); return b2f(truth(x) || truth(y)) }
	case opMin:
		return func(r []float64) float64 { return min(a(r), b(r)) }
	case opMax:
		return func(r []float64) float64 { return max(a(r), b(r)) }
	case opFunc2:
		f := t.f2
		return func(r []float64) float64 { return f(a(r), b(r)) }
	case opAddK:
		return func(r []float64) float64 { return a(r) + k }
	case opSubK:
		return func(r []float64) float64 { return a(r) - k }
	case opKSub:
		return func(r []float64) float64 { return k - a(r) }
	case opMulK:
		return func(r []float64) float64 { return a(r) * k }
	case opDivK:
		return func(r []float64) float64 { return a(r) / k }
	case opKDiv:
		return func(r []float64) float64 { return k / a(r) }
	case opEqK:
		return func(r []float64) float64 { return b2f(a(r) == k) }
	case opNeK:
		return func(r []float64) float64 { return b2f(a(r) != k) }
	case opLtK:
		return func(r []float64) float64 { return b2f(a(r) < k) }
	case opLeK:
		return func(r []float64) float64 { return b2f(a(r) <= k) }
	case opGtK:
		return func(r []float64) float64 { return b2f(a(r) > k) }
	case opGeK:
		return func(r []float64) float64 { return b2f(a(r) >= k) }
	case opWhere:
		return func(r []float64) float64 {
			x, y, z := a(r), b(r), c(r)
			if truth(x) {
				return y
			}
			return z
		}
	}
	panic(fmt.Sprintf("observable: unknown opcode %d", t.op))
}
