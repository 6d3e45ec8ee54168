package result

import (
	"bytes"
	"encoding/json"
)

// marshal encodes v as JSON laid out for reading and for size: objects
// and arrays of objects one member per line, indented by two spaces;
// arrays of numbers, strings and booleans on one line. A covariance of
// n×n numbers thus takes n lines instead of n².
func marshal(v any) ([]byte, error) {
	compact, err := json.Marshal(v)
	if err != nil {
		return nil, err
	}
	var b bytes.Buffer
	b.Grow(len(compact) + len(compact)/8)
	layout(&b, compact)
	b.WriteByte('\n')
	return b.Bytes(), nil
}

// layout writes the compact JSON src to b with the layout of marshal.
func layout(b *bytes.Buffer, src []byte) {
	depth := 0
	newline := func() {
		b.WriteByte('\n')
		for range depth {
			b.WriteString("  ")
		}
	}
	for i := 0; i < len(src); i++ {
		c := src[i]
		switch c {
		case '"':
			j := stringEnd(src, i)
			b.Write(src[i:j])
			i = j - 1
		case '[', '{':
			end := matching(src, i)
			if end == i+1 { // empty
				b.Write(src[i : end+1])
				i = end
				continue
			}
			if c == '[' && flat(src[i+1:end]) {
				writeFlat(b, src[i:end+1])
				i = end
				continue
			}
			b.WriteByte(c)
			depth++
			newline()
		case ']', '}':
			depth--
			newline()
			b.WriteByte(c)
		case ',':
			b.WriteByte(',')
			newline()
		case ':':
			b.WriteString(": ")
		default:
			b.WriteByte(c)
		}
	}
}

// stringEnd returns the index just after the JSON string starting at
// src[i] == '"'.
func stringEnd(src []byte, i int) int {
	for j := i + 1; j < len(src); j++ {
		switch src[j] {
		case '\\':
			j++
		case '"':
			return j + 1
		}
	}
	return len(src)
}

// matching returns the index of the bracket closing the one at src[i].
func matching(src []byte, i int) int {
	depth := 0
	for j := i; j < len(src); j++ {
		switch src[j] {
		case '"':
			j = stringEnd(src, j) - 1
		case '[', '{':
			depth++
		case ']', '}':
			depth--
			if depth == 0 {
				return j
			}
		}
	}
	return len(src) - 1
}

// flat reports whether the array content holds no nested array or object.
func flat(content []byte) bool {
	for j := 0; j < len(content); j++ {
		switch content[j] {
		case '"':
			j = stringEnd(content, j) - 1
		case '[', '{':
			return false
		}
	}
	return true
}

// writeFlat writes a flat array with a space after each comma.
func writeFlat(b *bytes.Buffer, arr []byte) {
	for j := 0; j < len(arr); j++ {
		switch arr[j] {
		case '"':
			k := stringEnd(arr, j)
			b.Write(arr[j:k])
			j = k - 1
		case ',':
			b.WriteString(", ")
		default:
			b.WriteByte(arr[j])
		}
	}
}
