package report

// Plural returns "N one" or "N many", N written by FormatCount: "1 unit",
// "12,345 units".
func Plural(n int64, one, many string) string {
	return FormatCount(n) + " " + PluralWord(n, one, many)
}

// PluralWord returns one when n is 1 and many otherwise.
func PluralWord(n int64, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}
