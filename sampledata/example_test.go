package sampledata_test

import (
	"fmt"
	"math/rand/v2"
	"os"

	"github.com/armtally/armtally/sampledata"
)

// Generate streams rows to a callback; here they are only counted.
func ExampleGenerate() {
	cfg := sampledata.DemoConfig()
	cfg.Users, cfg.NeverExposedUsers = 1000, 0
	counts := map[string]int{}
	err := sampledata.Generate(cfg, rand.NewPCG(1, 2), func(e sampledata.Event) error {
		counts[e.Name]++
		return nil
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, name := range []string{cfg.ExposureEvent, cfg.Metrics[0].Event, cfg.Metrics[1].Event} {
		fmt.Println(name, counts[name])
	}
	// Output:
	// exposure 1313
	// purchase 324
	// newsletter_signup 276
}

// A three-unit log where half the units purchase, written as CSV.
func ExampleWriteCSV() {
	cfg := sampledata.DemoConfig()
	cfg.Users, cfg.NeverExposedUsers = 3, 0
	cfg.NoiseEventsPerUser = 0.5
	for i := range cfg.Arms {
		cfg.Arms[i].Rates[0] = 0.5
	}
	sum, err := sampledata.WriteCSV(os.Stdout, cfg, rand.NewPCG(3, 4))
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(sum.Rows, "rows,", sum.ExposureRows, "exposures")
	// u0000002 converts on purchase (3 days after its exposure, inside the
	// 7-day window) but not on newsletter_signup (5 days after, outside the
	// 3-day window).

	// Output:
	// user_id,ts,event,experiment,arm,platform
	// u0000003,2026-11-02T01:56:52.248021Z,exposure,checkout-flow-2026,control,web
	// u0000002,2026-11-09T05:17:44.627864Z,exposure,checkout-flow-2026,control,web
	// u0000002,2026-11-09T07:27:13.643256Z,page_view,,,web
	// u0000003,2026-11-09T15:17:29.394488Z,search,,,web
	// u0000002,2026-11-12T04:20:28.941414Z,purchase,,,web
	// u0000002,2026-11-14T09:48:27.910305Z,newsletter_signup,,,web
	// u0000001,2026-11-14T19:15:30.623387Z,exposure,checkout-flow-2026,saved-basket,web
	// 7 rows, 3 exposures
}
