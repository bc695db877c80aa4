package experiment

import (
	"strings"
	"unicode/utf8"
)

// NameCount is one name the input holds (an experiment key, an arm, an
// event name) and how much of it: rows or units, as its user says.
type NameCount struct {
	Name  string
	Count int64
}

// MetricEventRows returns, for each event name of the spec's metrics (in
// the order of Events, the exposure event left out), the number of rows of
// that event the tallier was given: valid rows anywhere in the input,
// whatever their time, unit or experiment. A count of 0 means the event
// never occurs in the rows added so far.
func (t *Tallier) MetricEventRows() []NameCount {
	out := make([]NameCount, len(t.metricNames))
	for i, name := range t.metricNames {
		out[i] = NameCount{Name: name, Count: t.metricRows[i]}
	}
	return out
}

// ExperimentKeys returns the distinct experiment keys seen on exposure
// rows, sorted, when the spec has no key (a spec with a key does not
// collect them: nil). A null key is "". Tally fails when there are two or
// more; this lets a caller see them first.
func (t *Tallier) ExperimentKeys() []string {
	if t.spec.Key != "" {
		return nil
	}
	return t.experimentKeys()
}

// ArmsWithUnits returns the arms of t that have exposed units (or, for a
// counts table, which has no exposures, units), in tally order, with that
// count.
func ArmsWithUnits(t Tally) []NameCount {
	var out []NameCount
	for _, a := range t.Arms {
		if n := max(a.Exposed, a.Units); n > 0 {
			out = append(out, NameCount{Name: a.Name, Count: n})
		}
	}
	return out
}

// maxCompared is the most runes of a name Closest compares by edit
// distance; longer names are compared by case and prefix only.
const maxCompared = 128

// Closest returns the name among held that name most likely is a mistyped
// form of, or "" when none is close: the same name in another case, else
// the one with the smallest edit distance (insertions, deletions,
// substitutions and swaps of two neighbouring characters, the optimal
// string alignment distance) when that distance is at most a quarter of
// name's length (at least 1 from three characters on, at most 3), else the shortest held name that
// starts with name or that name starts with (a suffix or prefix left out,
// as in "checkout-flow" for "checkout-flow-2026"). Ties go to the earlier
// name in held. A name equal to name is not returned.
func Closest(name string, held []string) string {
	for _, h := range held {
		if h != name && strings.EqualFold(h, name) {
			return h
		}
	}
	best, bestD := "", 0
	if n := utf8.RuneCountInString(name); n <= maxCompared {
		limit := min(3, n/4)
		if n >= 3 {
			limit = max(1, limit)
		}
		a := []rune(name)
		for _, h := range held {
			if limit == 0 || h == name || utf8.RuneCountInString(h) > maxCompared {
				continue
			}
			b := []rune(h)
			if d := len(a) - len(b); d > limit || -d > limit {
				continue
			}
			if d := osaDistance(a, b); d <= limit && (best == "" || d < bestD) {
				best, bestD = h, d
			}
		}
	}
	if best != "" || name == "" {
		return best
	}
	for _, h := range held {
		if h != "" && h != name && (strings.HasPrefix(h, name) || strings.HasPrefix(name, h)) &&
			(best == "" || len(h) < len(best)) {
			best = h
		}
	}
	return best
}

// osaDistance is the optimal string alignment distance of a and b: the
// fewest insertions, deletions, substitutions and swaps of adjacent runes
// that turn a into b, no substring edited twice (the restricted
// Damerau-Levenshtein distance; Damerau 1964, "A technique for computer
// detection and correction of spelling errors", CACM 7(3)).
func osaDistance(a, b []rune) int {
	prev2 := make([]int, len(b)+1)
	prev := make([]int, len(b)+1)
	cur := make([]int, len(b)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(a); i++ {
		cur[0] = i
		for j := 1; j <= len(b); j++ {
			cost := 1
			if a[i-1] == b[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
			if i > 1 && j > 1 && a[i-1] == b[j-2] && a[i-2] == b[j-1] {
				cur[j] = min(cur[j], prev2[j-2]+1)
			}
		}
		prev2, prev, cur = prev, cur, prev2
	}
	return prev[len(b)]
}
