package ingest

// smallSet is the most names a nameSet looks up by a linear scan, which
// beats hashing the name when there are few (the events of a few metrics,
// the arms of an experiment); larger sets use a map.
const smallSet = 8

// nameSet is a set of names, read by the workers of a Reader at once: it
// is not modified after newNameSet.
type nameSet struct {
	list []string
	m    map[string]bool
}

func newNameSet(names []string) *nameSet {
	s := &nameSet{}
	for _, n := range names {
		if !s.has(n) {
			s.list = append(s.list, n)
		}
	}
	if len(s.list) > smallSet {
		s.m = make(map[string]bool, len(s.list))
		for _, n := range s.list {
			s.m[n] = true
		}
	}
	return s
}

func (s *nameSet) has(name string) bool {
	if s.m != nil {
		return s.m[name]
	}
	for _, n := range s.list {
		if n == name {
			return true
		}
	}
	return false
}

// plannedArms holds Options.PlannedArms: the planned arms per experiment
// key, the key "" applying to keys not listed.
type plannedArms struct {
	keys []string
	arms []*nameSet
	m    map[string]*nameSet
}

func newPlannedArms(planned map[string][]string) *plannedArms {
	p := &plannedArms{}
	for key, arms := range planned {
		p.keys = append(p.keys, key)
		p.arms = append(p.arms, newNameSet(arms))
	}
	if len(p.keys) > smallSet {
		p.m = make(map[string]*nameSet, len(p.keys))
		for i, k := range p.keys {
			p.m[k] = p.arms[i]
		}
	}
	return p
}

// of returns the planned arms of an experiment key, or nil when neither
// the key nor "" is listed.
func (p *plannedArms) of(key string) *nameSet {
	if p.m != nil {
		if s, ok := p.m[key]; ok {
			return s
		}
		return p.m[""]
	}
	var fallback *nameSet
	for i, k := range p.keys {
		if k == key {
			return p.arms[i]
		}
		if k == "" {
			fallback = p.arms[i]
		}
	}
	return fallback
}
