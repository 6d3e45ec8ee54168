package flagval

import "testing"

func TestChoice(t *testing.T) {
	var v int
	c := NewChoice(&v, 2, []string{"a", "b", "c"}, []int{1, 2, 3})
	if c.String() != "b" || c.Type() != "a|b|c" {
		t.Errorf("default %q type %q", c.String(), c.Type())
	}
	if err := c.Set("c"); err != nil || v != 3 {
		t.Errorf("Set(c): %v, v = %d", err, v)
	}
	if err := c.Set("C"); err == nil || v != 3 {
		t.Errorf("Set(C) = %v, v = %d; want an error and no change", err, v)
	}
}

// Units: kB/MB/GB are SI powers of 1000 and KiB/MiB/GiB binary powers of
// 1024 (IEC 80000-13:2008).
func TestByteSize(t *testing.T) {
	var n int64
	b := NewByteSize(&n, 4<<30)
	if b.String() != "4GiB" {
		t.Errorf("default %q", b.String())
	}
	for in, want := range map[string]int64{"8GiB": 8 << 30, "500MB": 500e6, "1e9": 1e9, " 2 kib ": 2048, "3g": 3 << 30, "10B": 10, "1.5KiB": 1536} {
		if err := b.Set(in); err != nil || n != want {
			t.Errorf("Set(%q): %v, n = %d, want %d", in, err, n, want)
		}
	}
	// "0.5" would truncate to 0 bytes, which means the default limit to
	// the kernel: it must be refused, not silently replaced.
	for _, bad := range []string{"", "GiB", "-1GiB", "0", "NaN", "1e30TiB", "x", "0.5", "0.9B", "1e-4kB"} {
		if err := b.Set(bad); err == nil {
			t.Errorf("Set(%q) succeeded", bad)
		}
	}
}

// Names and values of different lengths are a programming error.
func TestChoicePanics(t *testing.T) {
	defer func() {
		if recover() == nil {
			t.Error("NewChoice with 2 names and 1 value did not panic")
		}
	}()
	var v int
	NewChoice(&v, 0, []string{"a", "b"}, []int{1})
}

// CountOrAuto takes a count or "auto" and refuses anything else.
func TestCountOrAuto(t *testing.T) {
	var n int
	var auto bool
	c := NewCountOrAuto(&n, &auto)
	if err := c.Set("7"); err != nil || n != 7 || auto || c.String() != "7" {
		t.Errorf("7: %v %d %v %s", err, n, auto, c)
	}
	if err := c.Set("auto"); err != nil || n != 0 || !auto || c.String() != "auto" {
		t.Errorf("auto: %v %d %v %s", err, n, auto, c)
	}
	for _, bad := range []string{"four", "", "1.5"} {
		if err := c.Set(bad); err == nil {
			t.Errorf("%q accepted", bad)
		}
	}
}
