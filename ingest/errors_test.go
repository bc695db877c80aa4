package ingest

import (
	"errors"
	"strings"
	"testing"
	"unicode/utf8"
)

// checkPrintable fails unless msg is valid UTF-8 without control
// characters, C1 controls or bidi overrides and isolates.
func checkPrintable(t *testing.T, msg string) {
	t.Helper()
	if !utf8.ValidString(msg) {
		t.Errorf("message is not valid UTF-8: %q", msg)
	}
	for _, r := range msg {
		if r < 0x20 || r == 0x7f || (r >= 0x80 && r <= 0x9f) || (r >= 0x202a && r <= 0x202e) || (r >= 0x2066 && r <= 0x2069) {
			t.Errorf("message holds %U: %q", r, msg)
			return
		}
	}
}

// TestMissingColumnBinaryHeader reads a file of 4,096 NUL bytes as CSV:
// its one header name is 4,096 NULs, and the missing-column error shows
// 16 of them as \x00 (64 bytes of escapes) and the name's length.
func TestMissingColumnBinaryHeader(t *testing.T) {
	in := strings.Repeat("\x00", 4096)
	_, _, err := readAll(t, []Source{BytesSource("nul.csv", []byte(in))}, Options{Mapping: DefaultMapping()})
	if !errors.Is(err, ErrMissingColumn) {
		t.Fatalf("error %v, want ErrMissingColumn", err)
	}
	want := `nul.csv: column "user_id": missing column (the file has: ` + strings.Repeat(`\x00`, 16) + `... (4096 bytes))`
	if err.Error() != want {
		t.Errorf("message\n got %.300q\nwant %q", err.Error(), want)
	}
	checkPrintable(t, err.Error())
}

// TestMessagesEscapeValues checks the quoting of values and names from the
// data in RowError and ColumnError: escapes as in the Markdown readout,
// cut after 64 bytes.
func TestMessagesEscapeValues(t *testing.T) {
	long := strings.Repeat("9", 70)
	tests := []struct {
		name string
		err  error
		want string
	}{
		{"timestamp with terminal escape",
			&RowError{File: "e.csv", Row: 2, RowGroup: -1, Column: "ts", Value: "2026\x1b[2J", Err: ErrBadTimestamp},
			`e.csv:2: column "ts": cannot parse "2026\x1b[2J" as a timestamp (want RFC 3339 or YYYY-MM-DD[ HH:MM:SS[.frac]])`},
		{"long timestamp cut",
			&RowError{File: "e.csv", Row: 2, RowGroup: -1, Column: "ts", Value: long, Err: ErrTimestampRange},
			`e.csv:2: column "ts": timestamp "` + long[:64] + `... (70 bytes)" is outside the range of nanosecond timestamps (1677-09-21 to 2262-04-11)`},
		{"arm not planned, bidi override and invalid byte",
			&RowError{File: "e.parquet", Row: 7, RowGroup: 0, Column: "arm\u202e", Value: "tr\xe9at\a", Err: ErrUnknownArm},
			`e.parquet:7: row group 0: column "arm\u202e": exposure row with an arm that is not planned (value "tr\xe9at\x07")`},
		{"column name cut",
			&ColumnError{File: "e.csv", Column: strings.Repeat("\x00", 100), Err: ErrMissingColumn},
			`e.csv: column "` + strings.Repeat(`\x00`, 16) + `... (100 bytes)": missing column`},
		{"detail escaped",
			&ColumnError{File: "e.csv", Column: "user_id", Err: ErrColumnType, Detail: "type \x1b[31m"},
			`e.csv: column "user_id": unsupported column type (type \x1b[31m)`},
		{"names listed",
			missingColumn("e.csv", "arm", []string{"a\tb", strings.Repeat("c", 65)}, []string{"d\u0085"}),
			`e.csv: column "arm": missing column (the file has: a\x09b, ` + strings.Repeat("c", 64) + `... (65 bytes); partition keys: d\u0085)`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := tc.err.Error(); got != tc.want {
				t.Errorf("message\n got %s\nwant %s", got, tc.want)
			}
			checkPrintable(t, tc.err.Error())
		})
	}
}

// TestMissingColumnListCapped checks that a header of many columns lists
// the first 100 names and counts the rest.
func TestMissingColumnListCapped(t *testing.T) {
	names := make([]string, 150)
	for i := range names {
		names[i] = "c"
	}
	msg := missingColumn("w.csv", "arm", names, nil).Error()
	want := `w.csv: column "arm": missing column (the file has: ` + strings.TrimSuffix(strings.Repeat("c, ", 100), ", ") + ` and 50 more)`
	if msg != want {
		t.Errorf("message\n got %s\nwant %s", msg, want)
	}
}
