package sampledata

import (
	"reflect"
	"strings"
	"testing"
)

func TestParseArm(t *testing.T) {
	for _, tc := range []struct {
		in      string
		metrics int
		want    ArmConfig
		wantErr string
	}{
		{"control=1:0.10,0.04", 2, ArmConfig{Name: "control", Share: 1, Rates: []float64{0.10, 0.04}}, ""},
		{"one-page=2.5:0.12", 1, ArmConfig{Name: "one-page", Share: 2.5, Rates: []float64{0.12}}, ""},
		{"control=1:0.10", 2, ArmConfig{}, "1 rates for 2 metrics"},
		{"control:0.10", 1, ArmConfig{}, "want NAME=SHARE:RATE"},
		{"=1:0.10", 1, ArmConfig{}, "want NAME=SHARE:RATE"},
		{"control=x:0.10", 1, ArmConfig{}, `share "x" is not a number`},
		{"control=1:y", 1, ArmConfig{}, `rate "y" is not a number`},
	} {
		got, err := ParseArm(tc.in, tc.metrics)
		if tc.wantErr != "" {
			if err == nil || !strings.Contains(err.Error(), tc.wantErr) {
				t.Errorf("ParseArm(%q): error %v, want one containing %q", tc.in, err, tc.wantErr)
			}
			continue
		}
		if err != nil || !reflect.DeepEqual(got, tc.want) {
			t.Errorf("ParseArm(%q) = %+v, %v; want %+v", tc.in, got, err, tc.want)
		}
	}
}
