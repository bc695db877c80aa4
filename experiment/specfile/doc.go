// Package specfile reads experiment spec files: TOML files that name the
// input, the column mapping, the outputs and one or more experiments, each
// with its metrics. Parse and Read check a file key by key and return a
// File; every problem is an *Error (or several, Errors) naming the file,
// the line and the key.
//
// Settings holds one experiment's settings with where each came from (an
// Origin: a spec-file key or a command-line flag), so that a command can
// apply its flags over a file's values and still say which of the two a
// contradiction comes from. Settings.Build checks the settings against
// each other and returns the experiment.Spec and
// experiment.AnalysisOptions of the run.
//
// The value parsers (ParseMetric, ParseWindow, ParseMargin, ...) read the
// forms flags and files share. Help returns the documented example spec
// file.
package specfile
