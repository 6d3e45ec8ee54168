package flagval

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Choice is a flag whose value is one of a fixed list of names, each
// standing for a value of type T.
type Choice[T comparable] struct {
	p     *T
	names []string
	vals  []T
}

// NewChoice returns a Choice that stores into p, with def as the
// default. names and vals are parallel; names are matched exactly.
func NewChoice[T comparable](p *T, def T, names []string, vals []T) *Choice[T] {
	if len(names) != len(vals) || len(names) == 0 {
		panic("flagval: names and values differ in length")
	}
	*p = def
	return &Choice[T]{p: p, names: names, vals: vals}
}

// NewEnum is NewChoice for an enumeration whose values name themselves:
// the names are the values' String results, in the order of vals.
func NewEnum[T interface {
	comparable
	fmt.Stringer
}](p *T, def T, vals []T) *Choice[T] {
	names := make([]string, len(vals))
	for i, v := range vals {
		names[i] = v.String()
	}
	return NewChoice(p, def, names, vals)
}

// String returns the name of the current value.
func (c *Choice[T]) String() string {
	for i, v := range c.vals {
		if v == *c.p {
			return c.names[i]
		}
	}
	return ""
}

// Set sets the value by name.
func (c *Choice[T]) Set(s string) error {
	for i, n := range c.names {
		if n == s {
			*c.p = c.vals[i]
			return nil
		}
	}
	return fmt.Errorf("unknown value %q: use %s", s, strings.Join(c.names, ", "))
}

// Type returns the choices for the help text, e.g. "none|diag|full".
func (c *Choice[T]) Type() string { return strings.Join(c.names, "|") }

// ByteSize is a flag holding a number of bytes, written as a number with
// an optional unit: B, kB, MB, GB, TB (powers of 1000) or KiB, MiB, GiB,
// TiB (powers of 1024), case-insensitive, e.g. "8GiB", "500MB", "1e9".
type ByteSize struct{ p *int64 }

// NewByteSize returns a ByteSize storing into p with default def.
func NewByteSize(p *int64, def int64) *ByteSize {
	*p = def
	return &ByteSize{p: p}
}

var units = []struct {
	suffix string
	factor float64
}{
	{"kib", 1 << 10}, {"mib", 1 << 20}, {"gib", 1 << 30}, {"tib", 1 << 40},
	{"kb", 1e3}, {"mb", 1e6}, {"gb", 1e9}, {"tb", 1e12},
	{"k", 1 << 10}, {"m", 1 << 20}, {"g", 1 << 30}, {"t", 1 << 40},
	{"b", 1},
}

// String returns the size in the largest binary unit that divides it.
func (b *ByteSize) String() string {
	n := *b.p
	for _, u := range []struct {
		s string
		f int64
	}{{"TiB", 1 << 40}, {"GiB", 1 << 30}, {"MiB", 1 << 20}, {"KiB", 1 << 10}} {
		if n != 0 && n%u.f == 0 {
			return strconv.FormatInt(n/u.f, 10) + u.s
		}
	}
	return strconv.FormatInt(n, 10)
}

// Set parses a size.
func (b *ByteSize) Set(s string) error {
	t := strings.ToLower(strings.TrimSpace(s))
	factor := 1.0
	for _, u := range units {
		if strings.HasSuffix(t, u.suffix) {
			t, factor = strings.TrimSpace(strings.TrimSuffix(t, u.suffix)), u.factor
			break
		}
	}
	v, err := strconv.ParseFloat(t, 64)
	if err != nil || math.IsNaN(v) || v <= 0 || math.IsInf(v, 0) {
		return fmt.Errorf("%q is not a positive size (e.g. 8GiB, 500MB, 1e9)", s)
	}
	if v*factor >= math.MaxInt64 {
		return fmt.Errorf("%q is too large a size (at most 8EiB)", s)
	}
	// A size below one byte would truncate to 0, which callers read as
	// "the default": refuse it rather than silently use the default.
	if v*factor < 1 {
		return fmt.Errorf("%q is less than one byte; give a size such as 8GiB, 500MB or 1e9", s)
	}
	*b.p = int64(v * factor)
	return nil
}

// Type returns "size".
func (b *ByteSize) Type() string { return "size" }

// CountOrAuto is a flag holding a positive count or the word "auto".
type CountOrAuto struct {
	p    *int
	auto *bool
}

// NewCountOrAuto returns a CountOrAuto storing a count into p (and false
// into auto), or true into auto for "auto".
func NewCountOrAuto(p *int, auto *bool) *CountOrAuto { return &CountOrAuto{p: p, auto: auto} }

func (c *CountOrAuto) String() string {
	if c.auto != nil && *c.auto {
		return "auto"
	}
	if c.p == nil {
		return "0"
	}
	return strconv.Itoa(*c.p)
}

// Set accepts an integer or "auto"; the range of the count is the
// settings' to check.
func (c *CountOrAuto) Set(s string) error {
	if s == "auto" {
		*c.auto, *c.p = true, 0
		return nil
	}
	n, err := strconv.Atoi(s)
	if err != nil {
		return fmt.Errorf("want a number of iterations or auto, not %q", s)
	}
	*c.auto, *c.p = false, n
	return nil
}

// Type is the value's name in the usage text.
func (c *CountOrAuto) Type() string { return "count|auto" }
