package observable

import "math"

// bnode is the batch form of a term: each node owns a scratch buffer of
// ChunkSize values that holds its result when it is an operand.
type bnode struct {
	op   opcode
	col  int
	val  float64
	f1   func(float64) float64
	f2   func(float64, float64) float64
	args []*bnode
	buf  []float64
}

// build makes the batch tree and the column views of e.
func (e *Expr) build() {
	e.root = newBnode(e.tree)
	e.view = make([][]float64, len(e.names))
}

func newBnode(t *term) *bnode {
	n := &bnode{op: t.op, col: t.col, val: t.val, f1: t.f1, f2: t.f2}
	for _, a := range t.args {
		n.args = append(n.args, newBnode(a))
	}
	switch t.op {
	case opCol:
	case opConst:
		n.buf = make([]float64, ChunkSize)
		for i := range n.buf {
			n.buf[i] = t.val
		}
	default:
		n.buf = make([]float64, ChunkSize)
	}
	return n
}

// value returns the node's values for the m rows of the current chunk.
func (n *bnode) value(in [][]float64, m int) []float64 {
	switch n.op {
	case opCol:
		return in[n.col][:m]
	case opConst:
		return n.buf[:m]
	}
	out := n.buf[:m]
	n.eval(out, in)
	return out
}

// eval computes the node into out for the len(out) rows of the chunk.
func (n *bnode) eval(out []float64, in [][]float64) {
	m := len(out)
	a := n.args[0].value(in, m)
	a = a[:len(out)]
	k := n.val
	switch n.op {
	case opNeg:
		for i := range out {
			out[i] = -a[i]
		}
	case opNot:
		for i := range out {
			out[i] = b2f(!truth(a[i]))
		}
	case opAbs:
		for i := range out {
			out[i] = math.Abs(a[i])
		}
	case opSqrt:
		for i := range out {
			out[i] = math.Sqrt(a[i])
		}
	case opFloor:
		for i := range out {
			out[i] = math.Floor(a[i])
		}
	case opCeil:
		for i := range out {
			out[i] = math.Ceil(a[i])
		}
	case opFunc1:
		f := n.f1
		for i := range out {
			out[i] = f(a[i])
		}
	case opAddK:
		for i := range out {
			out[i] = a[i] + k
		}
	case opSubK:
		for i := range out {
			out[i] = a[i] - k
		}
	case opKSub:
		for i := range out {
			out[i] = k - a[i]
		}
	case opMulK:
		for i := range out {
			out[i] = a[i] * k
		}
	case opDivK:
		for i := range out {
			out[i] = a[i] / k
		}
	case opKDiv:
		for i := range out {
			out[i] = k / a[i]
		}
	case opEqK:
		for i := range out {
			out[i] = b2f(a[i] == k)
		}
	case opNeK:
		for i := range out {
			out[i] = b2f(a[i] != k)
		}
	case opLtK:
		for i := range out {
			out[i] = b2f(a[i] < k)
		}
	case opLeK:
		for i := range out {
			out[i] = b2f(a[i] <= k)
		}
	case opGtK:
		for i := range out {
			out[i] = b2f(a[i] > k)
		}
	case opGeK:
		for i := range out {
			out[i] = b2f(a[i] >= k)
		}
	default:
		n.eval2(out, a, in)
	}
}

// eval2 handles the nodes with two or three vector operands.
func (n *bnode) eval2(out, a []float64, in [][]float64) {
	m := len(out)
	b := n.args[1].value(in, m)
	b = b[:len(out)]
	switch n.op {
	case opAdd:
		for i := range out {
			out[i] = a[i] + b[i]
		}
	case opSub:
		for i := range out {
			out[i] = a[i] - b[i]
		}
	case opMul:
		for i := range out {
			out[i] = a[i] * b[i]
		}
	case opDiv:
		for i := range out {
			out[i] = a[i] / b[i]
		}
	case opMod:
		for i := range out {
			out[i] = math.Mod(a[i], b[i])
		}
	case opEq:
		for i := range out {
			out[i] = b2f(a[i] == b[i])
		}
	case opNe:
		for i := range out {
			out[i] = b2f(a[i] != b[i])
		}
	case opLt:
		for i := range out {
			out[i] = b2f(a[i] < b[i])
		}
	case opLe:
		for i := range out {
			out[i] = b2f(a[i] <= b[i])
		}
	case opGt:
		for i := range out {
			out[i] = b2f(a[i] > b[i])
		}
	case opGe:
		for i := range out {
			out[i] = b2f(a[i] >= b[i])
		}
	case opAnd:
		for i := range out {
			out[i] = b2f(min(math.Abs(a[i]), math.Abs(b[i])) > 0) // truth(a) && truth(b); min propagates NaN
		}
	case opOr:
		for i := range out {
			out[i] = b2f(truth(a[i]) || truth(b[i]))
		}
	case opMin:
		for i := range out {
			out[i] = min(a[i], b[i])
		}
	case opMax:
		for i := range out {
			out[i] = max(a[i], b[i])
		}
	case opFunc2:
		f := n.f2
		for i := range out {
			out[i] = f(a[i], b[i])
		}
	case opWhere:
		c := n.args[2].value(in, m)
		c = c[:len(out)]
		for i := range out {
			if truth(a[i]) {
				out[i] = b[i]
			} else {
				out[i] = c[i]
			}
		}
	default:
		panic("observable: unknown opcode")
	}
}
