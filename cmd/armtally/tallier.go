package main

import (
	"github.com/apache/arrow-go/v18/arrow"

	"github.com/armtally/armtally/experiment"
)

// The input shapes of a run (input.shape in a spec file).
const (
	shapeEvents = experiment.InputEventLog
	shapeUnits  = experiment.InputUnitTable
	shapeCounts = experiment.InputCounts
)

// tallier is what the three input shapes' talliers have in common.
type tallier interface {
	Add(arrow.RecordBatch) error
	Tally() (experiment.Tally, error)
}

// newTallier returns the tallier of the input shape for spec.
func newTallier(shape experiment.InputShape, spec experiment.Spec) (tallier, error) {
	switch shape {
	case shapeUnits:
		return experiment.NewUnitTableTallier(spec)
	case shapeCounts:
		return experiment.NewCountsTallier(spec)
	}
	return experiment.NewTallier(spec)
}
