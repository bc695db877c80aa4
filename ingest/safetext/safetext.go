// Package safetext writes text that came from the data (arm, metric, event
// and column names, segment values, experiment keys, raw cell values) so
// that it cannot change how an output reads: control characters and
// invalid UTF-8 become visible escapes for people (Visible, Short), and
// names stay one to one in JSON (Exact). It imports nothing of armtally,
// so the report writers and the input errors share one rule.
package safetext

import (
	"strconv"
	"strings"
	"unicode/utf8"
)

const hexDigits = "0123456789abcdef"

// Visible returns s with every character that could hide text, reorder it
// or drive a terminal written as a visible escape, and everything else as
// it is:
//
//   - each C0 control (U+0000 to U+001F, tab and newline included), DEL
//     and each byte that is not part of valid UTF-8 as \xNN, two
//     lower-case hex digits of the byte;
//   - each C1 control (U+0080 to U+009F), the bidirectional embeddings,
//     overrides and isolates (U+202A to U+202E, U+2066 to U+2069) and the
//     line and paragraph separators (U+2028, U+2029) as \uNNNN.
//
// The result is valid UTF-8 without control characters. A string that
// needs no escape is returned unchanged. Backslashes are left alone, so
// the escapes are for reading, not for decoding: a name spelled with a
// literal "\x1b" looks like one holding ESC (Exact is the one-to-one form).
func Visible(s string) string {
	v, _ := visible(s, -1)
	return v
}

// Short is Visible for a value quoted in a message: when the escaped text
// is longer than max bytes it is cut before the first escape or character
// that would pass max, and "... (N bytes)" follows, N being the length of
// s. A max of 0 or less means no limit.
func Short(s string, max int) string {
	v, cut := visible(s, max)
	if cut {
		v += "... (" + strconv.Itoa(len(s)) + " bytes)"
	}
	return v
}

// needsEscape reports whether r (a valid rune) is written as an escape.
func needsEscape(r rune) bool {
	switch {
	case r < 0x20, r == 0x7f:
		return true
	case r >= 0x80 && r <= 0x9f:
		return true
	case r >= 0x202a && r <= 0x202e, r >= 0x2066 && r <= 0x2069, r == 0x2028, r == 0x2029:
		return true
	}
	return false
}

// visible escapes s as Visible does, stopping before the piece that would
// make the result longer than max (when max > 0); cut says it stopped.
func visible(s string, max int) (string, bool) {
	if max <= 0 || len(s) <= max {
		if plain(s) {
			return s, false
		}
	}
	var b strings.Builder
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		var piece string
		switch {
		case r == utf8.RuneError && n == 1, r < 0x80 && needsEscape(r):
			piece = `\x` + string([]byte{hexDigits[s[i]>>4], hexDigits[s[i]&0xf]})
		case needsEscape(r):
			piece = `\u` + string([]byte{hexDigits[r>>12&0xf], hexDigits[r>>8&0xf], hexDigits[r>>4&0xf], hexDigits[r&0xf]})
		default:
			piece = s[i : i+n]
		}
		if max > 0 && b.Len()+len(piece) > max {
			return b.String(), true
		}
		b.WriteString(piece)
		i += n
	}
	return b.String(), false
}

// plain reports whether s is valid UTF-8 with nothing to escape.
func plain(s string) bool {
	for i := 0; i < len(s); {
		c := s[i]
		if c < utf8.RuneSelf {
			if c < 0x20 || c == 0x7f {
				return false
			}
			i++
			continue
		}
		r, n := utf8.DecodeRuneInString(s[i:])
		if (r == utf8.RuneError && n == 1) || needsEscape(r) {
			return false
		}
		i += n
	}
	return true
}

// Exact returns the form of a name in the JSON readout, which keeps names
// that differ different:
//
//   - a name that is valid UTF-8 and does not contain a backslash
//     followed by "x" is written as it is (the JSON encoder then escapes
//     its control characters as \u00NN, which decodes back exactly);
//   - any other name is written with each backslash doubled and each
//     byte that is not part of valid UTF-8 as the four characters \xNN
//     (two lower-case hex digits).
//
// The mapping is one to one: the second form always contains `\x` and
// the first never does, and the second decodes back by reading `\\` as a
// backslash and `\xNN` as the byte NN. So the bytes tr, 0xE9, at give
// "tr\xe9at" and tr, 0xE8, at give "tr\xe8at", while a valid name spelled
// with the four characters \xe9 gives "tr\\xe9at".
func Exact(s string) string {
	if utf8.ValidString(s) && !strings.Contains(s, `\x`) {
		return s
	}
	var b strings.Builder
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n == 1:
			b.WriteString(`\x`)
			b.WriteByte(hexDigits[s[i]>>4])
			b.WriteByte(hexDigits[s[i]&0xf])
		case r == '\\':
			b.WriteString(`\\`)
		default:
			b.WriteString(s[i : i+n])
		}
		i += n
	}
	return b.String()
}
