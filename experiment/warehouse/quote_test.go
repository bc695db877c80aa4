package warehouse

import (
	"fmt"
	"strconv"
	"strings"
	"testing"
)

// hostile are names that break a query quoted carelessly.
var hostile = []string{
	"plain", "", `'`, `''`, `"`, "`", `\`, `\'`, `'; DROP TABLE t; --`, `"; DROP TABLE t; --`,
	"`; DROP TABLE t; --", `a\`, `\\'`, "new\nline", "tab\tcr\r", "bell\x07del\x7f", "ünïcødé 日本 🎉",
	"$$; SELECT 1; $$", "/* comment", "-- comment", `E'x'`, `U&'\0041'`,
}

// lexer reads one quoted token from the start of s by a dialect's
// documented rules (written here from the documentation, apart from the
// code that quotes) and returns its value and the rest of s.
type lexer func(s string) (value, rest string, err error)

// doubled reads a token delimited by q in which a doubled q stands for
// one: SQL standard string literals and delimited identifiers (DuckDB,
// PostgreSQL identifiers, Trino, Snowflake identifiers, Spark
// identifiers with backticks).
func doubled(q byte) lexer {
	return func(s string) (string, string, error) {
		if len(s) == 0 || s[0] != q {
			return "", "", fmt.Errorf("does not start with %c", q)
		}
		var b strings.Builder
		for i := 1; i < len(s); i++ {
			if s[i] != q {
				b.WriteByte(s[i])
				continue
			}
			if i+1 < len(s) && s[i+1] == q {
				b.WriteByte(q)
				i++
				continue
			}
			return b.String(), s[i+1:], nil
		}
		return "", "", fmt.Errorf("unterminated")
	}
}

// backslashed reads a token delimited by q in which a backslash starts
// an escape: \\, \<quote>, \n-style letters and \uXXXX (Spark SQL
// "Literals", GoogleSQL "Lexical structure", Snowflake "Escape sequences
// in single-quoted string constants"); allowDoubled also reads a doubled
// quote as one (PostgreSQL E” strings, Snowflake).
func backslashed(prefix string, q byte, allowDoubled bool) lexer {
	return func(s string) (string, string, error) {
		if !strings.HasPrefix(s, prefix+string(q)) {
			return "", "", fmt.Errorf("does not start with %s%c", prefix, q)
		}
		var b strings.Builder
		for i := len(prefix) + 1; i < len(s); i++ {
			switch c := s[i]; {
			case c == '\\':
				if i+1 >= len(s) {
					return "", "", fmt.Errorf("dangling backslash")
				}
				i++
				switch e := s[i]; e {
				case 'n':
					b.WriteByte('\n')
				case 't':
					b.WriteByte('\t')
				case 'r':
					b.WriteByte('\r')
				case 'u':
					if i+4 >= len(s) {
						return "", "", fmt.Errorf("short \\u")
					}
					n, err := strconv.ParseUint(s[i+1:i+5], 16, 32)
					if err != nil {
						return "", "", err
					}
					b.WriteRune(rune(n))
					i += 4
				default:
					b.WriteByte(e)
				}
			case c == q:
				if allowDoubled && i+1 < len(s) && s[i+1] == q {
					b.WriteByte(q)
					i++
					continue
				}
				return b.String(), s[i+1:], nil
			case c == '\n' && prefix == "" && q == '\'':
				return "", "", fmt.Errorf("raw newline in a quoted string")
			default:
				b.WriteByte(c)
			}
		}
		return "", "", fmt.Errorf("unterminated")
	}
}

// TestQuotingRoundTrips renders every hostile name as a string literal
// and as an identifier in every dialect, reads the token back by the
// dialect's rules, and checks that it holds the name exactly and ends
// where the rendering ends: nothing of the name can escape its token.
func TestQuotingRoundTrips(t *testing.T) {
	cases := []struct {
		d          Dialect
		str, ident lexer
	}{
		{DuckDB, doubled('\''), doubled('"')},                                 // DuckDB "Literal Types", "Keywords and Identifiers"
		{PostgreSQL, backslashed("E", '\'', true), doubled('"')},              // PostgreSQL 15 "Lexical Structure" 4.1.2.2, 4.1.1
		{Trino, doubled('\''), doubled('"')},                                  // Trino "Literals", "Identifiers"
		{SparkSQL, backslashed("", '\'', false), doubled('`')},                // Spark SQL "Literals", "Identifiers"
		{BigQuery, backslashed("", '\'', false), backslashed("", '`', false)}, // GoogleSQL "Lexical structure and syntax"
		{Snowflake, backslashed("", '\'', true), doubled('"')},                // Snowflake "String & binary data types", "Identifier requirements"
	}
	for _, c := range cases {
		for _, name := range hostile {
			for _, k := range []struct {
				kind string
				text string
				lex  lexer
			}{{"string", c.d.str(name), c.str}, {"identifier", c.d.ident(name), c.ident}} {
				got, rest, err := k.lex(k.text + " AND x")
				if err != nil || got != name || rest != " AND x" {
					t.Errorf("%v %s of %q: rendered %s, read back %q (rest %q, err %v)", c.d, k.kind, name, k.text, got, rest, err)
				}
			}
		}
	}
}

// TestHostileNamesInQuery checks that the whole query of a definition
// full of hostile names holds each only inside its quoted tokens: with
// every quoted token of the dialect removed, no statement separator or
// comment start is left.
func TestHostileNamesInQuery(t *testing.T) {
	def := hostileDefinition()
	q, err := Build(def)
	if err != nil {
		t.Fatal(err)
	}
	for d := DuckDB; d <= Snowflake; d++ {
		text, err := q.SQL(d)
		if err != nil {
			t.Fatal(err)
		}
		bare := stripQuoted(t, d, text)
		// The query's own header comment is the only comment.
		bare = strings.TrimPrefix(bare, bare[:strings.Index(bare, "\n")+1])
		for _, bad := range []string{";", "--", "/*", "DROP"} {
			if strings.Contains(bare, bad) {
				t.Errorf("%v: %q outside quoted tokens in\n%s", d, bad, bare)
			}
		}
	}
}

// stripQuoted removes the dialect's quoted tokens from a query.
func stripQuoted(t *testing.T, d Dialect, text string) string {
	t.Helper()
	var out strings.Builder
	for i := 0; i < len(text); {
		var lex lexer
		switch {
		case d == PostgreSQL && strings.HasPrefix(text[i:], "E'"):
			lex = backslashed("E", '\'', true)
		case text[i] == '\'' && (d == SparkSQL || d == BigQuery):
			lex = backslashed("", '\'', false)
		case text[i] == '\'' && d == Snowflake:
			lex = backslashed("", '\'', true)
		case text[i] == '\'':
			lex = doubled('\'')
		case text[i] == '`' && d == BigQuery:
			lex = backslashed("", '`', false)
		case text[i] == '`' && d == SparkSQL:
			lex = doubled('`')
		case text[i] == '"' && d != SparkSQL && d != BigQuery:
			lex = doubled('"')
		}
		if lex == nil {
			out.WriteByte(text[i])
			i++
			continue
		}
		_, rest, err := lex(text[i:])
		if err != nil {
			t.Fatalf("%v: %v at %q", d, err, text[i:min(len(text), i+40)])
		}
		out.WriteString("Q")
		i = len(text) - len(rest)
	}
	return out.String()
}
