package report

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"slices"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/armtally/armtally/ingest/profile"
	"github.com/armtally/armtally/ingest/safetext"
)

// WriteProfile writes the profile of an event log (profile.Build) as text:
// per file its format, row count, partitions, columns and mapping; then
// the rows read, valid and bad (by reason, with the first bad row of
// each), the time range, the exposure rows by experiment and arm and the
// event names by rows, the first p.EventsShown of them.
//
// The profile is for the terminal: every name and message from the files
// (file, column, experiment, arm and event names, partition values, error
// texts) is written by safetext.Visible, so control characters, bidi
// controls and bytes that are not UTF-8 show as escapes.
func WriteProfile(w io.Writer, p *profile.Report) error {
	var b bytes.Buffer
	for _, f := range p.Files {
		writeProfileFile(&b, f)
	}
	fmt.Fprintf(&b, "rows read: %s in %s; %s valid, %s bad\n", FormatCount(p.RowsRead), Plural(int64(len(p.Files)), "file", "files"),
		FormatCount(p.ValidRows), FormatCount(p.RowsRead-p.ValidRows))
	for _, r := range p.BadRows {
		fmt.Fprintf(&b, "  %s: %s\n", r.Reason, FormatCount(r.Count))
	}
	for i, e := range p.BadRowExamples {
		if i == 0 {
			b.WriteString("  first bad row of each reason:\n")
		}
		fmt.Fprintf(&b, "    %s\n", vis(e))
	}
	if p.First != nil {
		fmt.Fprintf(&b, "time range: %s to %s\n", p.First.Format(time.RFC3339Nano), p.Last.Format(time.RFC3339Nano))
	} else {
		b.WriteString("time range: no valid rows\n")
	}
	writeProfileCounts(&b, p)
	_, err := w.Write(b.Bytes())
	return err
}

// vis writes a name or message from the files for the terminal.
func vis(s string) string { return safetext.Visible(s) }

// profileTable returns a tabwriter for an aligned block of the profile.
func profileTable(b *bytes.Buffer) *tabwriter.Writer { return tabwriter.NewWriter(b, 0, 0, 2, ' ', 0) }

// writeProfileFile writes the block of one file.
func writeProfileFile(b *bytes.Buffer, f profile.File) {
	fmt.Fprintf(b, "%s\n", vis(f.Name))
	rows := "rows counted"
	if f.RowsFrom == "metadata" {
		rows = "rows (from the file's metadata)"
	}
	fmt.Fprintf(b, "  format: %s, %d columns, %s %s\n", f.Format, len(f.Columns), FormatCount(f.Rows), rows)
	if len(f.Partitions) > 0 {
		var ps []string
		for _, p := range f.Partitions {
			ps = append(ps, vis(p.Key)+"="+vis(p.Value))
		}
		fmt.Fprintf(b, "  partitions: %s\n", strings.Join(ps, ", "))
	}
	b.WriteString("  columns:\n")
	t := profileTable(b)
	for _, c := range f.Columns {
		fmt.Fprintf(t, "    %s\t%s\n", vis(c.Name), vis(c.Type))
	}
	t.Flush()
	b.WriteString("  mapping:\n")
	t = profileTable(b)
	for _, m := range f.Mapping {
		switch m.Status {
		case profile.StatusColumn:
			fmt.Fprintf(t, "    %s\t<- %s\n", m.Logical, vis(m.Physical))
		case profile.StatusPartition:
			fmt.Fprintf(t, "    %s\t<- %s (partition folder)\n", m.Logical, vis(m.Physical))
		case profile.StatusNotMapped:
			fmt.Fprintf(t, "    %s\tnot mapped\n", m.Logical)
		default:
			fmt.Fprintf(t, "    %s\tMISSING: no column %q\n", m.Logical, m.Physical)
		}
	}
	t.Flush()
	if f.Error != "" {
		fmt.Fprintf(b, "  rows not read: %s\n", vis(f.Error))
	}
	b.WriteString("\n")
}

// writeProfileCounts writes the exposure rows and the event names.
func writeProfileCounts(b *bytes.Buffer, p *profile.Report) {
	fmt.Fprintf(b, "\nexposure rows (event %q) by experiment and arm:\n", p.ExposureEvent)
	if len(p.Exposures) == 0 {
		b.WriteString("  none\n")
	}
	t := profileTable(b)
	var total int64
	for _, e := range p.Exposures {
		fmt.Fprintf(t, "  %s\t%s\t%s\n", vis(e.Experiment), vis(e.Arm), FormatCount(e.Rows))
		total += e.Rows
	}
	t.Flush()
	if len(p.Exposures) > 0 {
		fmt.Fprintf(b, "  total %s\n", FormatCount(total))
	}
	fmt.Fprintf(b, "\nevents (%s names) by rows:\n", FormatCount(int64(len(p.Events))))
	t = profileTable(b)
	shown := max(0, min(p.EventsShown, len(p.Events)))
	for _, e := range p.Events[:shown] {
		fmt.Fprintf(t, "  %s\t%s\n", vis(e.Event), FormatCount(e.Rows))
	}
	t.Flush()
	if more := p.Events[shown:]; len(more) > 0 {
		var rows int64
		for _, e := range more {
			rows += e.Rows
		}
		n := int64(len(more))
		fmt.Fprintf(b, "  %s more %s (%s)\n", FormatCount(n), PluralWord(n, "name", "names"), Plural(rows, "row", "rows"))
	}
}

// WriteProfileJSON writes p as indented JSON. Names read from the data
// (files, columns, partition values, experiment keys, arms, events) go
// through safetext.Exact, so names that differ stay different in the JSON
// as they do in the readout's (see the README, "Names from the data").
func WriteProfileJSON(w io.Writer, p *profile.Report) error {
	q := *p
	q.Files = make([]profile.File, len(p.Files))
	for i, f := range p.Files {
		f.Name = safetext.Exact(f.Name)
		f.Columns = slices.Clone(f.Columns)
		for j := range f.Columns {
			f.Columns[j].Name = safetext.Exact(f.Columns[j].Name)
		}
		f.Partitions = slices.Clone(f.Partitions)
		for j := range f.Partitions {
			f.Partitions[j].Key = safetext.Exact(f.Partitions[j].Key)
			f.Partitions[j].Value = safetext.Exact(f.Partitions[j].Value)
		}
		q.Files[i] = f
	}
	q.Exposures = slices.Clone(p.Exposures)
	for i := range q.Exposures {
		q.Exposures[i].Experiment = safetext.Exact(q.Exposures[i].Experiment)
		q.Exposures[i].Arm = safetext.Exact(q.Exposures[i].Arm)
	}
	q.Events = slices.Clone(p.Events)
	for i := range q.Events {
		q.Events[i].Event = safetext.Exact(q.Events[i].Event)
	}
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(&q)
}
