package report

import (
	"time"

	"github.com/armtally/armtally/experiment"
)

// JSONMonitoring is the JSON form of experiment.Monitoring.
type JSONMonitoring struct {
	Look         int                 `json:"look"`
	LookAt       time.Time           `json:"look_at"`
	KeyKind      string              `json:"key_kind"`
	PreviousAt   *time.Time          `json:"previous_look_at"`
	History      bool                `json:"history"`
	PlannedUnits int64               `json:"planned_units_per_arm"`
	Comparisons  []JSONSequential    `json:"comparisons"`
	Progress     []JSONArmProgress   `json:"progress"`
	DaysLeft     *float64            `json:"days_left"`
	Detectable   *JSONDetectable     `json:"detectable_effect"`
	Changes      []JSONChange        `json:"changes"`
	Alerts       JSONMonitoringAlert `json:"alerts"`
}

// JSONSequential is the JSON form of experiment.SequentialComparison.
type JSONSequential struct {
	Metric              string   `json:"metric"`
	Treatment           string   `json:"treatment"`
	Control             string   `json:"control"`
	Method              string   `json:"method"`
	Spending            *string  `json:"spending"`
	Alpha               float64  `json:"alpha"`
	Sides               string   `json:"sides"`
	Look                int      `json:"look"`
	InformationFraction *float64 `json:"information_fraction"`
	AlphaSpent          *float64 `json:"alpha_spent"`
	Boundary            *float64 `json:"boundary"`
	BoundaryP           *float64 `json:"boundary_p_value"`
	Statistic           *float64 `json:"statistic"`
	Crossed             bool     `json:"crossed"`
	CrossedAtLook       *int     `json:"crossed_at_look"`
	MixingVariance      *float64 `json:"mixing_variance"`
	AlwaysValidP        *float64 `json:"always_valid_p_value"`
	SequenceLower       *float64 `json:"sequence_lower"`
	SequenceUpper       *float64 `json:"sequence_upper"`
	NotTested           *string  `json:"not_tested"`
}

// JSONArmProgress is the JSON form of experiment.ArmProgress.
type JSONArmProgress struct {
	Arm          string   `json:"arm"`
	Units        int64    `json:"units"`
	PlannedUnits int64    `json:"planned_units"`
	DailyUnits   *float64 `json:"daily_units"`
}

// JSONDetectable is the smallest detectable difference at the units so far.
type JSONDetectable struct {
	Metric     string  `json:"metric"`
	Difference float64 `json:"difference"`
	Power      float64 `json:"power"`
}

// JSONChange is the JSON form of experiment.Change.
type JSONChange struct {
	Kind      string `json:"kind"`
	Metric    string `json:"metric"`
	Treatment string `json:"treatment"`
	Details   string `json:"details"`
}

// JSONMonitoringAlert is the JSON form of experiment.MonitoringAlerts;
// durations in seconds.
type JSONMonitoringAlert struct {
	BoundaryCrossed     bool     `json:"boundary_crossed"`
	Stale               bool     `json:"stale"`
	MaxStalenessSeconds *float64 `json:"max_staleness_seconds"`
	AgeSeconds          *float64 `json:"age_seconds"`
}

func toJSONMonitoring(m *experiment.Monitoring) *JSONMonitoring {
	if m == nil {
		return nil
	}
	out := &JSONMonitoring{Look: m.Look, LookAt: m.LookAt.UTC(), KeyKind: m.KeyKind, PreviousAt: utc(m.PreviousAt),
		History: m.History, PlannedUnits: m.PlannedUnits, DaysLeft: m.DaysLeft,
		Comparisons: convertAll(m.Comparisons, toJSONSequential),
		Progress: convertAll(m.Progress, func(p experiment.ArmProgress) JSONArmProgress {
			return JSONArmProgress{Arm: jsonText(p.Arm), Units: p.Units, PlannedUnits: p.PlannedUnits, DailyUnits: p.DailyUnits}
		}),
		Changes: convertAll(m.Changes, func(c experiment.Change) JSONChange {
			return JSONChange{Kind: c.Kind, Metric: jsonText(c.Metric), Treatment: jsonText(c.Treatment), Details: jsonText(c.Details)}
		}),
		Alerts: JSONMonitoringAlert{BoundaryCrossed: m.Alerts.BoundaryCrossed, Stale: m.Alerts.Stale},
	}
	if m.DetectableEffect != nil {
		out.Detectable = &JSONDetectable{Metric: jsonText(m.DetectableMetric), Difference: *m.DetectableEffect, Power: 0.8}
	}
	if m.Alerts.MaxStaleness > 0 {
		s := m.Alerts.MaxStaleness.Seconds()
		out.Alerts.MaxStalenessSeconds = &s
	}
	if m.Alerts.Age != nil {
		s := m.Alerts.Age.Seconds()
		out.Alerts.AgeSeconds = &s
	}
	return out
}

func toJSONSequential(c experiment.SequentialComparison) JSONSequential {
	j := JSONSequential{Metric: jsonText(c.Metric), Treatment: jsonText(c.Treatment), Control: jsonText(c.Control),
		Method: c.Method, Alpha: c.Alpha, Sides: c.Sides, Look: c.Look, InformationFraction: c.InformationFraction,
		AlphaSpent: c.AlphaSpent, Boundary: finiteOrNil(c.Boundary), BoundaryP: c.BoundaryP, Statistic: c.Statistic,
		Crossed: c.Crossed, MixingVariance: c.MixingVariance, AlwaysValidP: c.AlwaysValidP,
		SequenceLower: c.SequenceLower, SequenceUpper: c.SequenceUpper}
	if c.Spending != "" {
		s := c.Spending
		j.Spending = &s
	}
	if c.CrossedAtLook > 0 {
		n := c.CrossedAtLook
		j.CrossedAtLook = &n
	}
	if c.NotTested != "" {
		s := c.NotTested
		j.NotTested = &s
	}
	return j
}

// finiteOrNil is nil for an infinite boundary (no alpha left to spend).
func finiteOrNil(p *float64) *float64 {
	if p == nil || *p > 1e308 || *p < -1e308 {
		return nil
	}
	return p
}
