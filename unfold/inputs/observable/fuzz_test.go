package observable

import (
	"math"
	"testing"
)

// FuzzCompile feeds arbitrary text to Compile: it must return an error or
// an expression, never panic, and a compiled expression must give the same
// values through Eval and EvalRow.
func FuzzCompile(f *testing.F) {
	for _, tc := range ref {
		f.Add(tc.src)
	}
	for _, s := range []string{"", "(", "px +", "sqrt(", "min(px,", "1e999", "0x", "px ** py", "!!!px", `col("`, "pi(1)", "where(1,2)"} {
		f.Add(s)
	}
	cols := randomColumns(70, 11)
	f.Fuzz(func(t *testing.T, src string) {
		e, err := Compile(src, testCols)
		if err != nil {
			if e != nil {
				t.Fatalf("%q: both an expression and an error", src)
			}
			return
		}
		dst := make([]float64, 70)
		e.Eval(dst, cols)
		row := make([]float64, len(testCols))
		for k := range dst {
			for c := range row {
				row[c] = cols[c][k]
			}
			if r := e.EvalRow(row); !same(r, dst[k]) && !(math.IsNaN(r) && math.IsNaN(dst[k])) {
				t.Fatalf("%q row %d: Eval %v, EvalRow %v", src, k, dst[k], r)
			}
		}
	})
}
