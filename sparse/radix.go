package sparse

// maxDigitBits bounds the width of one radix digit. 2^11 counters per
// digit keep the histograms and the scatter heads in L1.
const maxDigitBits = 11

// radixSorter holds the reusable histograms of a least-significant-digit
// radix sort of (key, weight) pairs.
type radixSorter struct {
	counts []uint32
}

// sort sorts the pairs (k0[i], w0[i]) by the low bits bits of the keys,
// stably: pairs with equal keys keep their input order. k1 and w1 are
// scratch of the same length. The sorted pairs are returned; they are
// either (k0, w0) or (k1, w1).
func (s *radixSorter) sort(k0 []uint64, w0 []float64, k1 []uint64, w1 []float64, bits uint) ([]uint64, []float64) {
	n := len(k0)
	if n < 2 || bits == 0 {
		return k0, w0
	}
	w0 = w0[:n]
	k1 = k1[:n]
	w1 = w1[:n]
	passes := (bits + maxDigitBits - 1) / maxDigitBits
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
