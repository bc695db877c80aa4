package specfile

import (
	_ "embed" // for the example spec file
)

// example is the annotated example spec file that Help ends with; a test
// checks that it parses and documents every key.
//
//go:embed testdata/example.toml
var example string

// helpIntro comes before the example in Help.
const helpIntro = `armtally analyze --spec FILE reads an experiment spec: a TOML file that names
the input, the column mapping, the outputs and one or more experiments, each
with its metrics. One run reads the log once and writes one readout per
experiment, all in one Markdown document and one JSON document.

Rules:
  - Paths in the file are relative to the file's folder; FILE arguments and
    flag values are relative to the current folder.
  - Flags you give override the file, and flags you leave out do not:
      FILE arguments replace input.paths (and so does --demo);
      --input-shape replaces input.shape (the file's metrics must then
        suit the new shape);
      --user-col, --ts-col, --event-col, --experiment-col, --arm-col,
        --epoch-unit, --metric-col, --units-col, --conversions-col and
        --immature-col replace the [columns] keys;
      --delimiter, --max-bad-rows and --max-bad-share replace the [input]
        keys of the same names;
      --out, --json, --audit and --fail-on-sample-ratio replace the
        [output] keys;
      --exposure-event, --control, --start, --end, --multi-arm, --maturity,
        --alpha, --alternative, --adjust, --interval, --difference-interval,
        --non-inferiority-method, --min-count and --sample-ratio-threshold
        apply to every experiment of the run;
      --metric, --secondary-metric and --guardrail together replace the
        metrics of every experiment of the run; --lower-is-better marks a
        metric in every experiment that has it; --allow-absent-event allows
        an event in every experiment whose metrics count it;
      --arms and --split apply to one experiment only: pick it with
        --experiment;
      --history, --looks-chart, --max-staleness and --exit-on-boundary
        replace output.history, output.looks_chart, output.max_staleness
        and output.exit_on_boundary, which apply to the whole run;
      any --sequential flag replaces the experiment.metric.sequential key
        of every metric; --planned-units and --mixing-variance replace
        experiment.planned_units and experiment.mixing_variance of every
        experiment of the run.
  - --experiment KEY runs only the experiment with that key. A file without
    [[experiment]] tables takes its one experiment from the flags, as
    without --spec.
  - The experiments of one run share their exposure event.
  - A key that is not listed below, a value of the wrong type and settings
    that contradict each other are errors naming the file, line and key.
    experiment[0] is the first [[experiment]] table, experiment[0].metric[1]
    the second metric of that experiment.
  - With the units and counts shapes, input.delimiter other than "," and
    input.max_bad_rows or input.max_bad_share other than 0 stop the run with
    "not supported yet: KEY": those readers do not have them yet.
  - Every entry of input.paths must name at least one input file; one that
    does not (a missing file or folder, a folder or pattern without .csv,
    .csv.gz, .parquet or .parq files) stops the run with exit code 3 and
    a message naming the file, line and key (input.paths[N]).

An example that shows every key:

`

// Help returns the documentation of the spec file: the rules, then an
// annotated example that shows every key.
func Help() string { return helpIntro + example }
