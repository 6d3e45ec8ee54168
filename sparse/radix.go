package sparse

import "math/bits"

// maxDigitBits bounds the width of one radix digit. 2^11 counters per
// digit keep the histograms and the scatter heads in L1.
const maxDigitBits = 11

// radixSorter holds the reusable histograms of a radix sort of (key,
// weight) pairs.
type radixSorter struct {
	counts []uint32
	top    []uint32
	heads  []uint32
}

// Above msdMinLen pairs the sort first distributes the pairs by their top
// digit into buckets that fit in cache, then sorts each bucket by the
// remaining bits with small digits; below, a plain LSD sort is used.
const (
	msdMinLen    = 1 << 15
	bucketLen    = 1 << 12 // aimed-for bucket size (64 KiB of pairs)
	maxMSDBits   = 11
	bucketDigits = maxDigitBits
)

// sort sorts the pairs (k0[i], w0[i]) by the low bits bits of the keys,
// stably: pairs with equal keys keep their input order. k1 and w1 are
// scratch of the same length. The sorted pairs are returned; they are
// either (k0, w0) or (k1, w1).
func (s *radixSorter) sort(k0 []uint64, w0 []float64, k1 []uint64, w1 []float64, keyBits uint) ([]uint64, []float64) {
	n := len(k0)
	if n < msdMinLen || keyBits <= 2*maxDigitBits {
		return s.lsd(k0, w0, k1, w1, keyBits, maxDigitBits)
	}
	// Distribute by the top msdBits bits into (k1, w1), stably.
	msdBits := uint(min(max(bits.Len(uint(n/bucketLen)), 4), maxMSDBits))
	low := keyBits - msdBits
	nb := 1 << msdBits
	if cap(s.top) < nb+1 {
		s.top = make([]uint32, nb+1)
	}
	top := s.top[:nb+1]
	clear(top)
	w0, k1, w1 = w0[:n], k1[:n], w1[:n]
	for _, k := range k0 {
		top[(k>>low)+1]++
	}
	for b := 1; b <= nb; b++ {
		top[b] += top[b-1]
	}
	if cap(s.heads) < nb {
		s.heads = make([]uint32, nb)
	}
	heads := s.heads[:nb]
	copy(heads, top[:nb])
	for i, k := range k0 {
		b := k >> low
		p := heads[b]
		heads[b] = p + 1
		k1[p] = k
		w1[p] = w0[i]
	}
	// Sort each bucket by the low bits; make every result land in (k1, w1).
	for b := 0; b < nb; b++ {
		lo, hi := int(top[b]), int(top[b+1])
		if hi-lo < 2 {
			continue
		}
		rk, rw := s.lsd(k1[lo:hi], w1[lo:hi], k0[lo:hi], w0[lo:hi], low, bucketDigits)
		if &rk[0] != &k1[lo] {
			copy(k1[lo:hi], rk)
			copy(w1[lo:hi], rw)
		}
	}
	return k1, w1
}

// lsd is a least-significant-digit radix sort with digits of at most
// maxDigit bits.
func (s *radixSorter) lsd(k0 []uint64, w0 []float64, k1 []uint64, w1 []float64, bits, maxDigit uint) ([]uint64, []float64) {
	n := len(k0)
	if n < 2 || bits == 0 {
		return k0, w0
	}
	w0 = w0[:n]
	k1 = k1[:n]
	w1 = w1[:n]
	passes := (bits + maxDigit - 1) / maxDigit
	digit := (bits + passes - 1) / passes
	nb := 1 << digit
	mask := uint64(nb - 1)
	need := int(passes) * nb
	if cap(s.counts) < need {
		s.counts = make([]uint32, need)
	}
	counts := s.counts[:need]
	clear(counts)

	// One read pass builds the histograms of every digit.
	switch passes {
	case 1:
		c0 := counts[:nb]
		for _, k := range k0 {
			c0[k&mask]++
		}
	case 2:
		c0, c1 := counts[:nb], counts[nb:2*nb]
		for _, k := range k0 {
			c0[k&mask]++
			c1[(k>>digit)&mask]++
		}
	case 3:
		c0, c1, c2 := counts[:nb], counts[nb:2*nb], counts[2*nb:3*nb]
		for _, k := range k0 {
			c0[k&mask]++
			c1[(k>>digit)&mask]++
			c2[(k>>(2*digit))&mask]++
		}
	default:
		for _, k := range k0 {
			for p := uint(0); p < passes; p++ {
				counts[int(p)*nb+int((k>>(p*digit))&mask)]++
			}
		}
	}

	src, sw := k0, w0
	dst, dw := k1, w1
	for p := uint(0); p < passes; p++ {
		c := counts[int(p)*nb : int(p+1)*nb]
		shift := p * digit
		// A digit with a single value everywhere needs no pass.
		if c[(src[0]>>shift)&mask] == uint32(n) {
			continue
		}
		var sum uint32
		for b, v := range c {
			c[b] = sum
			sum += v
		}
		for i, k := range src {
			b := (k >> shift) & mask
			pos := c[b]
			c[b] = pos + 1
			dst[pos] = k
			dw[pos] = sw[i]
		}
		src, dst = dst, src
		sw, dw = dw, sw
	}
	return src, sw
}
