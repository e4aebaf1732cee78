package pgserve

import (
	"strconv"
	"strings"
)

// placeholder is one $n in a statement's text.
type placeholder struct {
	start, end int // byte range of "$n"
	n          int // 1-based parameter number
}

// placeholders finds the $n parameters of a statement, skipping string literals,
// quoted identifiers, dollar-quoted strings and comments, where "$1" is text.
func placeholders(q string) []placeholder {
	var out []placeholder
	for i := 0; i < len(q); {
		switch c := q[i]; {
		case c == '\'' || c == '"':
			i = skipQuoted(q, i, c)
		case c == '-' && strings.HasPrefix(q[i:], "--"):
			if j := strings.IndexByte(q[i:], '\n'); j >= 0 {
				i += j + 1
			} else {
				i = len(q)
			}
		case c == '/' && strings.HasPrefix(q[i:], "/*"):
			i = skipBlockComment(q, i)
		case c == '$':
			j := i + 1
			for j < len(q) && q[j] >= '0' && q[j] <= '9' {
				j++
			}
			if j > i+1 && !(i > 0 && identByte(q[i-1])) {
				n, err := strconv.Atoi(q[i+1 : j])
				if err == nil {
					out = append(out, placeholder{start: i, end: j, n: n})
				}
				i = j
				continue
			}
			i = skipDollarQuoted(q, i)
		default:
			i++
		}
	}
	return out
}

// skipQuoted returns the index after the quoted run starting at i; a doubled quote
// stands for itself. An unclosed quote runs to the end.
func skipQuoted(q string, i int, quote byte) int {
	for j := i + 1; j < len(q); j++ {
		if q[j] == quote {
			if j+1 < len(q) && q[j+1] == quote {
				j++
				continue
			}
			return j + 1
		}
	}
	return len(q)
}

// skipBlockComment returns the index after the (possibly nested) comment at i.
func skipBlockComment(q string, i int) int {
	depth := 0
	for j := i; j < len(q)-1; j++ {
		switch {
		case q[j] == '/' && q[j+1] == '*':
			depth++
			j++
		case q[j] == '*' && q[j+1] == '/':
			depth--
			j++
			if depth == 0 {
				return j + 1
			}
		}
	}
	return len(q)
}

// skipDollarQuoted returns the index after a $tag$...$tag$ string starting at i, or
// i+1 when no dollar quote starts there.
func skipDollarQuoted(q string, i int) int {
	j := i + 1
	for j < len(q) && identByte(q[j]) {
		j++
	}
	if j >= len(q) || q[j] != '$' || (i > 0 && identByte(q[i-1])) {
		return i + 1
	}
	tag := q[i : j+1]
	if k := strings.Index(q[j+1:], tag); k >= 0 {
		return j + 1 + k + len(tag)
	}
	return len(q)
}

func identByte(c byte) bool {
	return c == '_' || c >= '0' && c <= '9' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= 0x80
}

// castParams rewrites the placeholders numbered in casts as CAST($n AS type), so that
// DuckDB can type a statement whose parameters it cannot infer.
func castParams(q string, casts map[int]string) string {
	if len(casts) == 0 {
		return q
	}
	var b strings.Builder
	last := 0
	for _, p := range placeholders(q) {
		t, ok := casts[p.n]
		if !ok {
			continue
		}
		b.WriteString(q[last:p.start])
		b.WriteString("CAST(")
		b.WriteString(q[p.start:p.end])
		b.WriteString(" AS ")
		b.WriteString(t)
		b.WriteString(")")
		last = p.end
	}
	b.WriteString(q[last:])
	return b.String()
}
