package sqlsplit

import "strings"

// NotePrefix starts a note line: "--: Training" prints "Training" before the next
// statement's result.
const NotePrefix = "--:"

// Statement is one statement of a script, with the notes written before it.
type Statement struct {
	Notes []string // note lines before the statement, prefix and one space removed
	SQL   string   // the statement without its final semicolon, trimmed; "" for trailing notes
	Line  int      // 1-based line where the statement text starts
}

// Split cuts script into statements. A final statement without a semicolon is kept.
// Statements that hold only whitespace and comments are dropped (their notes move on
// to the next statement).
func Split(script string) []Statement {
	var (
		out   []Statement
		notes []string
		buf   strings.Builder
		start = 0 // line where buf's text starts; 0 while buf holds no text
		line  = 1
	)
	flush := func(final bool) {
		text := strings.TrimSpace(buf.String())
		buf.Reset()
		if onlyComments(text) {
			if final && len(notes) > 0 {
				out = append(out, Statement{Notes: notes})
				notes = nil
			}
			start = 0
			return
		}
		out = append(out, Statement{Notes: notes, SQL: text, Line: start})
		notes = nil
		start = 0
	}
	s := script
	for i := 0; i < len(s); {
		c := s[i]
		switch {
		case c == '\n':
			buf.WriteByte(c)
			line++
			i++
		case c == '-' && strings.HasPrefix(s[i:], "--"):
			end := strings.IndexByte(s[i:], '\n')
			if end < 0 {
				end = len(s) - i
			}
			comment := s[i : i+end]
			if strings.HasPrefix(comment, NotePrefix) && onlyComments(buf.String()) {
				notes = append(notes, strings.TrimPrefix(strings.TrimPrefix(comment, NotePrefix), " "))
			} else {
				buf.WriteString(comment)
			}
			i += end
		case c == '/' && strings.HasPrefix(s[i:], "/*"):
			n := blockComment(s[i:])
			buf.WriteString(s[i : i+n])
			line += strings.Count(s[i:i+n], "\n")
			i += n
		case c == '\'' || c == '"':
			n := quotedAt(s, i)
			if start == 0 {
				start = line
			}
			buf.WriteString(s[i : i+n])
			line += strings.Count(s[i:i+n], "\n")
			i += n
		case c == '$':
			n := dollarQuoted(s[i:])
			if start == 0 {
				start = line
			}
			buf.WriteString(s[i : i+n])
			line += strings.Count(s[i:i+n], "\n")
			i += n
		case c == ';':
			flush(false)
			i++
		default:
			if start == 0 && c != ' ' && c != '\t' && c != '\r' {
				start = line
			}
			buf.WriteByte(c)
			i++
		}
	}
	flush(true)
	return out
}

// Complete reports whether script ends with a finished statement: its last
// non-blank, non-comment character is a semicolon outside quotes and comments. An
// interactive shell reads lines until Complete holds.
func Complete(script string) bool {
	last := byte(0)
	s := script
	for i := 0; i < len(s); {
		c := s[i]
		switch {
		case c == '-' && strings.HasPrefix(s[i:], "--"):
			end := strings.IndexByte(s[i:], '\n')
			if end < 0 {
				return last == ';'
			}
			i += end
		case c == '/' && strings.HasPrefix(s[i:], "/*"):
			n := blockComment(s[i:])
			if !strings.HasSuffix(s[i:i+n], "*/") || n < 4 {
				return false
			}
			i += n
		case c == '\'' || c == '"':
			n := quotedAt(s, i)
			if n < 2 || s[i+n-1] != c {
				return false
			}
			last = c
			i += n
		case c == '$':
			n := dollarQuoted(s[i:])
			if n > 1 && !closedDollar(s[i:i+n]) {
				return false
			}
			last = '$'
			i += n
		default:
			if c != ' ' && c != '\t' && c != '\r' && c != '\n' {
				last = c
			}
			i++
		}
	}
	return last == ';'
}

// quotedAt returns the length of the quoted text starting at s[i]: an escape string
// (E'…', where a backslash escapes the next character) or plain quoted text.
func quotedAt(s string, i int) int {
	if s[i] == '\'' && i > 0 && (s[i-1] == 'E' || s[i-1] == 'e') && (i == 1 || !identByte(s[i-2])) {
		return escQuoted(s[i:])
	}
	return quoted(s[i:], s[i])
}

// identByte reports whether c can be part of a bare identifier (so "tablE'x'" is no
// escape string).
func identByte(c byte) bool {
	return c == '_' || c == '$' || c >= '0' && c <= '9' || c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z' || c >= 0x80
}

// escQuoted is quoted for an escape string: a backslash escapes the next byte, and a
// doubled quote still stands for itself.
func escQuoted(s string) int {
	for i := 1; i < len(s); i++ {
		switch {
		case s[i] == '\\':
			i++
		case s[i] == '\'':
			if i+1 < len(s) && s[i+1] == '\'' {
				i++
				continue
			}
			return i + 1
		}
	}
	return len(s)
}

// quoted returns the length of the quoted text at the start of s (s[0] == q), with a
// doubled quote standing for itself; unterminated text runs to the end.
func quoted(s string, q byte) int {
	for i := 1; i < len(s); i++ {
		if s[i] == q {
			if i+1 < len(s) && s[i+1] == q {
				i++
				continue
			}
			return i + 1
		}
	}
	return len(s)
}

// blockComment returns the length of the (possibly nested) block comment at the start
// of s; unterminated, it runs to the end.
func blockComment(s string) int {
	depth := 0
	for i := 0; i+1 < len(s); i++ {
		switch {
		case s[i] == '/' && s[i+1] == '*':
			depth++
			i++
		case s[i] == '*' && s[i+1] == '/':
			depth--
			i++
			if depth == 0 {
				return i + 1
			}
		}
	}
	return len(s)
}

// dollarQuoted returns the length of the dollar-quoted string at the start of s, or 1
// when the '$' starts no such string (a parameter such as $1, or a lone dollar).
func dollarQuoted(s string) int {
	tag := dollarTag(s)
	if tag == "" {
		return 1
	}
	end := strings.Index(s[len(tag):], tag)
	if end < 0 {
		return len(s)
	}
	return len(tag) + end + len(tag)
}

// dollarTag returns the opening "$tag$" (or "$$") at the start of s, or "".
func dollarTag(s string) string {
	for i := 1; i < len(s); i++ {
		c := s[i]
		if c == '$' {
			return s[:i+1]
		}
		letter := c == '_' || (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c >= 0x80
		digit := c >= '0' && c <= '9'
		if !letter && !(digit && i > 1) {
			return ""
		}
	}
	return ""
}

func closedDollar(s string) bool {
	tag := dollarTag(s)
	return len(s) >= 2*len(tag) && strings.HasSuffix(s, tag)
}

// onlyComments reports whether text holds nothing but whitespace and comments.
func onlyComments(text string) bool {
	for i := 0; i < len(text); {
		c := text[i]
		switch {
		case c == ' ' || c == '\t' || c == '\r' || c == '\n':
			i++
		case strings.HasPrefix(text[i:], "--"):
			end := strings.IndexByte(text[i:], '\n')
			if end < 0 {
				return true
			}
			i += end
		case strings.HasPrefix(text[i:], "/*"):
			i += blockComment(text[i:])
		default:
			return false
		}
	}
	return true
}
