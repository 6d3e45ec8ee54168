package unfold

import "testing"

// Enum gives the name of a value in range, Type(v) and an error out of
// range, and parses only its own names, listing them when refusing.
func TestEnum(t *testing.T) {
	e := Enum{Pkg: "pkg", Type: "Kind", What: "kind", Names: []string{"a", "b"}}
	if e.Name(1) != "b" || e.Name(2) != "Kind(2)" || e.Name(-1) != "Kind(-1)" {
		t.Errorf("names %q %q %q", e.Name(1), e.Name(2), e.Name(-1))
	}
	if b, err := e.Text(0); err != nil || string(b) != "a" {
		t.Errorf("Text(0) = %q, %v", b, err)
	}
	if _, err := e.Text(2); err == nil || err.Error() != "pkg: invalid Kind(2)" {
		t.Errorf("Text(2): %v", err)
	}
	if v, err := e.Parse([]byte("b")); err != nil || v != 1 {
		t.Errorf("Parse(b) = %d, %v", v, err)
	}
	if _, err := e.Parse([]byte("c")); err == nil || err.Error() != `pkg: unknown kind "c" (want a, b)` {
		t.Errorf("Parse(c): %v", err)
	}
}
