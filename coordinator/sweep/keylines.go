package sweep

import (
	"fmt"
	"sort"
	"strconv"
	"strings"

	"github.com/BurntSushi/toml"
)

// The TOML library reports positions only for syntax errors; its per-key positions are
// private and keep only the last element of an array of tables. keyLines recovers the
// line of every key from the source text itself. It runs only on documents the library
// has already accepted, so it needs to understand just enough TOML to tell keys from
// values: table headers, dotted and quoted keys, strings of all four kinds (which may
// hold '#', '=', brackets and newlines), arrays and inline tables across lines, and
// comments. On anything it does not expect it stops and keeps what it found: a missing
// line degrades an error message to its nearest enclosing key's line, never to a panic.

// joinKey appends one key part to a path, quoting it the way TOML prints keys.
func joinKey(path, part string) string {
	q := toml.Key{part}.String()
	if path == "" {
		return q
	}
	return path + "." + q
}

// indexKey is the path of element i of the array at path.
func indexKey(path string, i int) string { return fmt.Sprintf("%s[%d]", path, i) }

// parentKey strips the last part or index from a path ("" when none is left).
func parentKey(path string) string {
	if strings.HasSuffix(path, "]") {
		if i := strings.LastIndexByte(path, '['); i >= 0 {
			return path[:i]
		}
	}
	// The last '.' outside quotes separates the last part.
	inQuote, last := false, -1
	for i := 0; i < len(path); i++ {
		switch c := path[i]; {
		case c == '\\' && inQuote:
			i++
		case c == '"':
			inQuote = !inQuote
		case c == '.' && !inQuote:
			last = i
		}
	}
	if last < 0 {
		return ""
	}
	return path[:last]
}

// displayKey is a path without array indices, as a person reads it in the file.
func displayKey(path string) string {
	var b strings.Builder
	inQuote := false
	for i := 0; i < len(path); i++ {
		c := path[i]
		switch {
		case c == '\\' && inQuote && i+1 < len(path):
			b.WriteByte(c)
			i++
			c = path[i]
		case c == '"':
			inQuote = !inQuote
		case c == '[' && !inQuote:
			for i < len(path) && path[i] != ']' {
				i++
			}
			continue
		}
		b.WriteByte(c)
	}
	return b.String()
}

// lineTable maps key paths to 1-based lines.
type lineTable map[string]int

// lineOf is the line of path, or of its nearest enclosing key that has one (0: none).
func (t lineTable) lineOf(path string) int {
	for path != "" {
		if l, ok := t[path]; ok {
			return l
		}
		path = parentKey(path)
	}
	return 0
}

type keyScanner struct {
	src    string
	pos    int
	nl     []int          // offsets of '\n'
	lines  lineTable      // result
	arrays map[string]int // elements seen so far of each array of tables
}

// keyLines returns the line of every key (and table header) of a valid TOML document.
func keyLines(src string) lineTable {
	s := &keyScanner{src: src, lines: lineTable{}, arrays: map[string]int{}}
	for i := 0; i < len(src); i++ {
		if src[i] == '\n' {
			s.nl = append(s.nl, i)
		}
	}
	s.document()
	return s.lines
}

func (s *keyScanner) line(pos int) int { return sort.SearchInts(s.nl, pos) + 1 }

func (s *keyScanner) eof() bool { return s.pos >= len(s.src) }

func (s *keyScanner) peek() byte {
	if s.eof() {
		return 0
	}
	return s.src[s.pos]
}

func (s *keyScanner) skipSpace() {
	for !s.eof() && (s.src[s.pos] == ' ' || s.src[s.pos] == '\t') {
		s.pos++
	}
}

// skipBlank skips spaces, newlines and comments.
func (s *keyScanner) skipBlank() {
	for !s.eof() {
		switch s.src[s.pos] {
		case ' ', '\t', '\r', '\n':
			s.pos++
		case '#':
			for !s.eof() && s.src[s.pos] != '\n' {
				s.pos++
			}
		default:
			return
		}
	}
}

func (s *keyScanner) record(path string, pos int, overwrite bool) {
	if _, ok := s.lines[path]; ok && !overwrite {
		return
	}
	s.lines[path] = s.line(pos)
}

// document scans top-level lines: headers and key = value pairs.
func (s *keyScanner) document() {
	context := ""
	for {
		s.skipBlank()
		if s.eof() {
			return
		}
		start := s.pos
		if strings.HasPrefix(s.src[s.pos:], "[[") {
			s.pos += 2
			parts, ok := s.key()
			if !ok || !strings.HasPrefix(s.src[s.pos:], "]]") {
				return
			}
			s.pos += 2
			context = s.header(parts, true, start)
			continue
		}
		if s.peek() == '[' {
			s.pos++
			parts, ok := s.key()
			if !ok || s.peek() != ']' {
				return
			}
			s.pos++
			context = s.header(parts, false, start)
			continue
		}
		if !s.pair(context) {
			return
		}
	}
}

// header resolves a table header against the arrays of tables seen so far: a prefix
// naming an array of tables means its last element.
func (s *keyScanner) header(parts []string, array bool, start int) string {
	path := ""
	for i, p := range parts {
		path = joinKey(path, p)
		last := i == len(parts)-1
		if last && array {
			s.record(path, start, false)
			s.arrays[path]++
		}
		if n := s.arrays[path]; n > 0 {
			path = indexKey(path, n-1)
		}
		s.record(path, start, last)
	}
	return path
}

// pair scans key = value in context, recording the key and any keys inside the value.
func (s *keyScanner) pair(context string) bool {
	start := s.pos
	parts, ok := s.key()
	if !ok || s.peek() != '=' {
		return false
	}
	s.pos++
	path := context
	for i, p := range parts {
		path = joinKey(path, p)
		s.record(path, start, i == len(parts)-1)
	}
	s.skipSpace()
	return s.value(path)
}

// key scans a possibly dotted key and the spaces after it.
func (s *keyScanner) key() ([]string, bool) {
	var parts []string
	for {
		s.skipSpace()
		var part string
		switch c := s.peek(); c {
		case '"':
			end := s.basicString()
			if end < 0 {
				return nil, false
			}
			raw := s.src[s.pos:end]
			s.pos = end
			part = unquoteBasic(raw)
		case '\'':
			end := strings.IndexByte(s.src[s.pos+1:], '\'')
			if end < 0 {
				return nil, false
			}
			part = s.src[s.pos+1 : s.pos+1+end]
			s.pos += end + 2
		default:
			begin := s.pos
			for !s.eof() && !strings.ContainsRune(" \t\r\n.=[]{},\"'#", rune(s.src[s.pos])) {
				s.pos++
			}
			if s.pos == begin {
				return nil, false
			}
			part = s.src[begin:s.pos]
		}
		parts = append(parts, part)
		s.skipSpace()
		if s.peek() != '.' {
			return parts, true
		}
		s.pos++
	}
}

// basicString returns the offset just past the "..." string starting at pos (-1: none).
func (s *keyScanner) basicString() int {
	for i := s.pos + 1; i < len(s.src); i++ {
		switch s.src[i] {
		case '\\':
			i++
		case '"':
			return i + 1
		case '\n':
			return -1
		}
	}
	return -1
}

func unquoteBasic(raw string) string {
	if u, err := strconv.Unquote(raw); err == nil {
		return u
	}
	return raw[1 : len(raw)-1]
}

// value scans one value, recording keys of inline tables under path.
func (s *keyScanner) value(path string) bool {
	rest := s.src[s.pos:]
	switch {
	case strings.HasPrefix(rest, `"""`):
		return s.multiline(`"""`, true)
	case strings.HasPrefix(rest, `'''`):
		return s.multiline(`'''`, false)
	case strings.HasPrefix(rest, `"`):
		end := s.basicString()
		if end < 0 {
			return false
		}
		s.pos = end
		return true
	case strings.HasPrefix(rest, `'`):
		end := strings.IndexByte(rest[1:], '\'')
		if end < 0 {
			return false
		}
		s.pos += end + 2
		return true
	case strings.HasPrefix(rest, "["):
		s.pos++
		for i := 0; ; i++ {
			s.skipBlank()
			if s.peek() == ']' {
				s.pos++
				return true
			}
			s.record(indexKey(path, i), s.pos, true)
			if s.eof() || !s.value(indexKey(path, i)) {
				return false
			}
			s.skipBlank()
			if s.peek() == ',' {
				s.pos++
			}
		}
	case strings.HasPrefix(rest, "{"):
		s.pos++
		for {
			s.skipBlank()
			if s.peek() == '}' {
				s.pos++
				return true
			}
			if s.eof() || !s.pair(path) {
				return false
			}
			s.skipBlank()
			if s.peek() == ',' {
				s.pos++
			}
		}
	}
	// A bare scalar: number, boolean, date or time (which may hold one space).
	begin := s.pos
	for !s.eof() && !strings.ContainsRune(",]}\r\n#", rune(s.src[s.pos])) {
		s.pos++
	}
	return s.pos > begin
}

// multiline skips a multi-line string, whose closing delimiter may be followed by up
// to two more quote characters that belong to the content.
func (s *keyScanner) multiline(delim string, escapes bool) bool {
	i := s.pos + 3
	for i < len(s.src) {
		if escapes && s.src[i] == '\\' {
			i += 2
			continue
		}
		if strings.HasPrefix(s.src[i:], delim) {
			i += 3
			for k := 0; k < 2 && i < len(s.src) && s.src[i] == delim[0]; k++ {
				i++
			}
			s.pos = i
			return true
		}
		i++
	}
	return false
}
