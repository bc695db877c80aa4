package main

import (
	"github.com/spf13/pflag"

	"github.com/armtally/armtally/ingest"
)

// mappingFlags are the column-mapping flags that analyze and inspect
// share: --user-col, --ts-col, --event-col, --experiment-col, --arm-col
// and --epoch-unit.
type mappingFlags struct {
	fs *pflag.FlagSet
	m  ingest.Mapping
}

// defineMappingFlags defines the column-mapping flags on fs, in this
// order, with the names of ingest.DefaultMapping as defaults.
func defineMappingFlags(fs *pflag.FlagSet) *mappingFlags {
	mf := &mappingFlags{fs: fs, m: ingest.DefaultMapping()}
	fs.StringVar(&mf.m.User, "user-col", mf.m.User, "column holding the unit (user) id")
	fs.StringVar(&mf.m.TS, "ts-col", mf.m.TS, "column holding the event time")
	fs.StringVar(&mf.m.Event, "event-col", mf.m.Event, "column holding the event name")
	fs.StringVar(&mf.m.Experiment, "experiment-col", mf.m.Experiment, "column holding the experiment key (\"\" when the log has none)")
	fs.StringVar(&mf.m.Arm, "arm-col", mf.m.Arm, "column holding the arm name")
	fs.StringVar(&mf.m.EpochUnit, "epoch-unit", "", "unit of integer timestamps: s, ms, us or ns")
	return mf
}

// apply sets on m each column the user gave a flag for, every one when
// all is set, and checks the epoch unit of the result; cmd names the
// command in the error.
func (mf *mappingFlags) apply(m *ingest.Mapping, all bool, cmd string) error {
	for _, c := range []struct {
		flag     string
		dst, src *string
	}{
		{"user-col", &m.User, &mf.m.User},
		{"ts-col", &m.TS, &mf.m.TS},
		{"event-col", &m.Event, &mf.m.Event},
		{"experiment-col", &m.Experiment, &mf.m.Experiment},
		{"arm-col", &m.Arm, &mf.m.Arm},
		{"epoch-unit", &m.EpochUnit, &mf.m.EpochUnit},
	} {
		if all || mf.fs.Changed(c.flag) {
			*c.dst = *c.src
		}
	}
	switch m.EpochUnit {
	case "", "s", "ms", "us", "ns":
		return nil
	}
	return usagef("%s: --epoch-unit %q: want s, ms, us or ns", cmd, m.EpochUnit)
}
