package main

import (
	"errors"
	"fmt"
	"strings"

	"github.com/armtally/armtally/experiment"
)

// The opt-in exit codes of a written readout, from the most to the least
// urgent: a failed sample ratio check (4, --fail-on-sample-ratio), a
// guardrail not held (5, --fail-on-guardrail), a run that says stop (7)
// or ship (6, both --exit-on-decision).
var (
	errSampleRatio  = errors.New("sample ratio mismatch")
	errGuardrail    = errors.New("guardrail not held")
	errDecisionStop = errors.New("decision: stop")
	errDecisionShip = errors.New("decision: ship")
)

// outcomeChecks are the opt-in exit codes a run asked for.
type outcomeChecks struct {
	sampleRatio, guardrail, decision bool
}

// checkOutcome returns the error of the most urgent opt-in exit code that
// applies to the written readouts (4, then 5, then 7, then 6), naming
// the experiments and rows concerned; nil when none applies.
func checkOutcome(c outcomeChecks, readouts []experiment.Readout) error {
	if c.sampleRatio {
		if err := checkSampleRatio(readouts); err != nil {
			return err
		}
	}
	if c.guardrail {
		var notHeld []string
		for _, r := range readouts {
			for _, row := range r.Verdict.Rows {
				if row.Guardrail && row.Outcome != experiment.OutcomeGuardrailHeld {
					notHeld = append(notHeld, fmt.Sprintf("%s: %s, %s: %s", r.Experiment, row.Metric, row.Treatment, row.Outcome))
				}
			}
		}
		if len(notHeld) > 0 {
			return fmt.Errorf("%w: %s (see the readout)", errGuardrail, strings.Join(notHeld, "; "))
		}
	}
	if !c.decision {
		return nil
	}
	var ds []experiment.Decision
	for _, r := range readouts {
		ds = append(ds, r.Verdict.Decision)
	}
	d := experiment.MostUrgent(ds)
	var err error
	switch d {
	case experiment.DecisionStop:
		err = errDecisionStop
	case experiment.DecisionShip:
		err = errDecisionShip
	default:
		return nil
	}
	var named []string
	for _, r := range readouts {
		if r.Verdict.Decision == d {
			named = append(named, fmt.Sprintf("%s: %s", r.Experiment, strings.Join(r.Verdict.Treatments, ", ")))
		}
	}
	return fmt.Errorf("%w (%s; see the readout)", err, strings.Join(named, "; "))
}

// checkSampleRatio returns errSampleRatio, with the experiments whose
// sample ratio check failed.
func checkSampleRatio(readouts []experiment.Readout) error {
	var failed []string
	for _, r := range readouts {
		if sr := r.SampleRatio; sr.Checked && sr.Mismatch {
			failed = append(failed, fmt.Sprintf("%s: p = %.3g < %g", r.Experiment, sr.PValue, sr.Threshold))
		}
	}
	if len(failed) > 0 {
		if len(readouts) == 1 {
			_, detail, _ := strings.Cut(failed[0], ": ")
			return fmt.Errorf("%w: %s (see the readout)", errSampleRatio, detail)
		}
		return fmt.Errorf("%w in %d of %d experiments (%s; see the readouts)", errSampleRatio, len(failed), len(readouts), strings.Join(failed, "; "))
	}
	return nil
}
