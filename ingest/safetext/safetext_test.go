package safetext

import (
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

// The code points escaped are those the Unicode Standard names as controls
// (C0, DEL, C1: General Category Cc), the explicit bidirectional
// formatting characters of UAX #9 (LRE, RLE, PDF, LRO, RLO; LRI, RLI, FSI,
// PDI) and the line and paragraph separators (Zl, Zp); from memory.
func TestVisible(t *testing.T) {
	tests := []struct {
		name, in, want string
	}{
		{"plain", "treatment", "treatment"},
		{"plain non-ASCII", "größe ✓ 日本", "größe ✓ 日本"},
		{"backslash left alone", `a\b`, `a\b`},
		{"ESC", "a\x1b[31mred", `a\x1b[31mred`},
		{"BEL", "a\ab", `a\x07b`},
		{"NUL", "a\x00b", `a\x00b`},
		{"tab and newline", "a\tb\nc\r", `a\x09b\x0ac\x0d`},
		{"DEL", "a\x7fb", `a\x7fb`},
		{"C1 NEL", "a\u0085b", `a\u0085b`},
		{"C1 CSI", "a\u009bb", `a\u009bb`},
		{"RLO", "a\u202eb", `a\u202eb`},
		{"LRE", "\u202a", `\u202a`},
		{"isolates", "\u2066\u2067\u2068\u2069", `\u2066\u2067\u2068\u2069`},
		{"separators", "\u2028\u2029", `\u2028\u2029`},
		{"not escaped: ZWJ, LRM", "a\u200db\u200e", "a\u200db\u200e"},
		{"invalid byte", "tr\xe9at", `tr\xe9at`},
		{"truncated sequence", "a\xe2\x82", `a\xe2\x82`},
		{"encoded surrogate", "\xed\xa0\x80", `\xed\xa0\x80`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := Visible(tc.in)
			if got != tc.want {
				t.Errorf("Visible(%q) = %q, want %q", tc.in, got, tc.want)
			}
			checkPrintable(t, got)
		})
	}
}

// checkPrintable fails unless s is valid UTF-8 without any rune Visible
// escapes.
func checkPrintable(t *testing.T, s string) {
	t.Helper()
	if !utf8.ValidString(s) {
		t.Errorf("%q is not valid UTF-8", s)
	}
	for _, r := range s {
		if needsEscape(r) {
			t.Errorf("%q holds %U", s, r)
		}
	}
}

func TestShort(t *testing.T) {
	nul := strings.Repeat("\x00", 4096)
	tests := []struct {
		name string
		in   string
		max  int
		want string
	}{
		{"short stays", "user_id", 64, "user_id"},
		{"exactly max", strings.Repeat("a", 64), 64, strings.Repeat("a", 64)},
		{"one over", strings.Repeat("a", 65), 64, strings.Repeat("a", 64) + "... (65 bytes)"},
		// 16 escapes of 4 bytes fill 64 bytes exactly.
		{"4096 NUL bytes", nul, 64, strings.Repeat(`\x00`, 16) + "... (4096 bytes)"},
		// An escape is never split: 63 letters leave no room for \x1b.
		{"escape not split", strings.Repeat("a", 63) + "\x1b", 64, strings.Repeat("a", 63) + "... (64 bytes)"},
		// A multi-byte character is never split: 63 letters and é (2 bytes).
		{"rune not split", strings.Repeat("a", 63) + "é", 64, strings.Repeat("a", 63) + "... (65 bytes)"},
		{"no limit", nul[:3], 0, `\x00\x00\x00`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := Short(tc.in, tc.max)
			if got != tc.want {
				t.Errorf("Short(%q, %d) = %q, want %q", tc.in, tc.max, got, tc.want)
			}
			checkPrintable(t, got)
		})
	}
}

// unexact decodes the output of Exact: a text without `\x` is the name;
// otherwise `\\` is a backslash and `\xNN` the byte NN.
func unexact(t *testing.T, s string) string {
	t.Helper()
	if !strings.Contains(s, `\x`) {
		return s
	}
	var b []byte
	for i := 0; i < len(s); i++ {
		if s[i] != '\\' {
			b = append(b, s[i])
			continue
		}
		switch {
		case i+1 < len(s) && s[i+1] == '\\':
			b = append(b, '\\')
			i++
		case i+3 < len(s) && s[i+1] == 'x':
			v, err := strconv.ParseUint(s[i+2:i+4], 16, 8)
			if err != nil {
				t.Fatalf("bad escape in %q: %v", s, err)
			}
			b = append(b, byte(v))
			i += 3
		default:
			t.Fatalf("lone backslash in escaped form %q", s)
		}
	}
	return string(b)
}

func TestExact(t *testing.T) {
	tests := []struct {
		name, in, want string
	}{
		{"plain", "treatment", "treatment"},
		{"control characters kept (the JSON encoder escapes them)", "a\x1b\x00\u202e", "a\x1b\x00\u202e"},
		{"backslash without x kept", `a\b\\c`, `a\b\\c`},
		{"invalid byte e9", "tr\xe9at", `tr\xe9at`},
		{"invalid byte e8", "tr\xe8at", `tr\xe8at`},
		{"literal backslash-x doubled", `tr\xe9at`, `tr\\xe9at`},
		{"invalid byte and backslash", "a\\b\xff", `a\\b\xff`},
		{"trailing backslash-x", `a\x`, `a\\x`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := Exact(tc.in)
			if got != tc.want {
				t.Errorf("Exact(%q) = %q, want %q", tc.in, got, tc.want)
			}
			if !utf8.ValidString(got) {
				t.Errorf("Exact(%q) = %q is not valid UTF-8", tc.in, got)
			}
			if back := unexact(t, got); back != tc.in {
				t.Errorf("decoding %q gives %q, want %q", got, back, tc.in)
			}
		})
	}
}

// FuzzExact checks that Exact is one to one: its output is valid UTF-8
// and decodes back to the input, so two names that differ never meet.
func FuzzExact(f *testing.F) {
	for _, s := range []string{"tr\xe9at", `tr\xe9at`, `\\x`, "\xff\\", "a"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got := Exact(s)
		if !utf8.ValidString(got) {
			t.Fatalf("Exact(%q) = %q is not valid UTF-8", s, got)
		}
		if back := unexact(t, got); back != s {
			t.Fatalf("Exact(%q) = %q decodes to %q", s, got, back)
		}
		checkPrintable(t, Visible(s))
	})
}
