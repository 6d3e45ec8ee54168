package bayes

import "math"

// logTableBits sets the table of fastLog: 2^7 sub-intervals of [1, 2).
const logTableBits = 7

var logTable [1 << logTableBits]struct{ lnc, inv float64 }

func init() {
	for k := range logTable {
		c := 1 + (float64(k)+0.5)/(1<<logTableBits)
		logTable[k].lnc = math.Log(c)
		logTable[k].inv = 1 / c
	}
}

// ln 2 split in a high part with trailing zero bits and a low part (the
// split of fdlibm's e_log.c).
const (
	ln2Hi = 6.93147180369123816490e-01
	ln2Lo = 1.90821492927058770002e-10
)

// fastLog returns ln x for the log-likelihood sums of every iteration,
// about twice as fast as math.Log. With x = 2^e m, m in [1, 2), and c
// the centre of m's table interval, ln x = e ln 2 + ln c + ln(1 + r),
// r = m/c − 1, |r| ≤ 1/257, the last term by its Taylor series to r⁶
// (truncation below 3e-18). The absolute error is below about
// 5e-16·max(1, |ln x|) (the relative error is larger only for x near 1,
// where ln x is near 0; the sums need only the absolute accuracy).
// Zero, subnormal, infinite and NaN arguments go to math.Log.
func fastLog(x float64) float64 {
	b := math.Float64bits(x)
	e := int(b>>52) - 1023
	if e == -1023 || e == 1024 || b>>63 != 0 {
		return math.Log(x)
	}
	t := &logTable[(b>>(52-logTableBits))&(1<<logTableBits-1)]
	m := math.Float64frombits(b&(1<<52-1) | 1023<<52)
	r := m*t.inv - 1
	p := r * (1 + r*(-0.5+r*(1.0/3+r*(-0.25+r*(0.2+r*(-1.0/6))))))
	fe := float64(e)
	return fe*ln2Hi + (t.lnc + (fe*ln2Lo + p))
}
