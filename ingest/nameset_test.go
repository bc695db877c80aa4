package ingest

import (
	"fmt"
	"testing"
)

// The linear scan and the map of a nameSet must agree, on both sides of
// smallSet, and plannedArms must fall back to the key "".
func TestNameSet(t *testing.T) {
	for _, n := range []int{0, 1, smallSet, smallSet + 1, 40} {
		var names []string
		for i := range n {
			names = append(names, fmt.Sprintf("e%d", i))
		}
		s := newNameSet(append(names, names...)) // duplicates count once
		for i := range n {
			if !s.has(fmt.Sprintf("e%d", i)) {
				t.Errorf("%d names: e%d missing", n, i)
			}
		}
		for _, x := range []string{"", "e", fmt.Sprintf("e%d", n), "E0"} {
			if s.has(x) {
				t.Errorf("%d names: has(%q)", n, x)
			}
		}
	}
	for _, keys := range []int{1, smallSet + 3} {
		planned := map[string][]string{"": {"control", "treatment"}}
		for i := range keys {
			planned[fmt.Sprintf("exp-%d", i)] = []string{"control", fmt.Sprintf("arm-%d", i)}
		}
		p := newPlannedArms(planned)
		if a := p.of("exp-0"); a == nil || !a.has("arm-0") || a.has("treatment") {
			t.Errorf("%d keys: exp-0's arms wrong", keys)
		}
		if a := p.of("not-listed"); a == nil || !a.has("treatment") || a.has("arm-0") {
			t.Errorf("%d keys: an unlisted key does not fall back to \"\"", keys)
		}
		delete(planned, "")
		if a := newPlannedArms(planned).of("not-listed"); a != nil {
			t.Errorf("%d keys: an unlisted key without \"\" has arms %v", keys, a.list)
		}
	}
}
