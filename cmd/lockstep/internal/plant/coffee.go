package plant

import "time"

// Coffee returns the built-in scenario, an invented coffee plant with three
// characteristics that each show lockstep one thing:
//
//   - fill-weight (g, 500 g bags): four filling lines L1–L4, SD 0.8 g,
//     2 values/s each; 5 min in, L3 starts to drift upward and is 1.5 g
//     heavy 10 min later — one group moving, which lockstep should name;
//   - seal-temperature (°C, nominal 182.0): six sealing jaws J1–J6,
//     SD 0.6 °C, 1 value/s each; 8 min in, J4's SD triples — a spread that
//     diverges while every mean stays put;
//   - cap-torque (N·m, nominal 2.10): eight capping heads H1–H8, SD
//     0.04 N·m, one value every 2 s each; all heads drift together by
//     +0.12 N·m over 4 h with the ambient temperature — a common cause,
//     which a between-group monitor should leave quiet.
//
// One message in a thousand is bad, the kinds in equal shares. The scenario
// runs for 4 h from a Start that the caller sets (it has none), with Seed 1.
// testdata/plant/coffee.toml holds the same scenario as a commented file.
func Coffee() Scenario {
	return Scenario{
		Name:     "coffee plant",
		Seed:     1,
		Duration: 4 * time.Hour,
		Bad:      Bad{Rate: 0.001},
		Characteristics: []Characteristic{
			{
				Name:       "fill-weight",
				Unit:       "g",
				Nominal:    "500.00",
				Resolution: 2,
				Min:        "450",
				Max:        "550",
				SD:         0.8,
				Rate:       2,
				Groups:     []string{"L1", "L2", "L3", "L4"},
				Events: []Event{
					{Kind: Shift, Group: "L3", At: 5 * time.Minute, Duration: 10 * time.Minute, By: 1.5},
				},
			},
			{
				Name:       "seal-temperature",
				Unit:       "°C",
				Nominal:    "182.0",
				Resolution: 1,
				Min:        "150",
				Max:        "220",
				SD:         0.6,
				Rate:       1,
				Groups:     []string{"J1", "J2", "J3", "J4", "J5", "J6"},
				Events: []Event{
					{Kind: Spread, Group: "J4", At: 8 * time.Minute, Factor: 3},
				},
			},
			{
				Name:       "cap-torque",
				Unit:       "N·m",
				Nominal:    "2.10",
				Resolution: 2,
				Min:        "0.5",
				Max:        "4.0",
				SD:         0.04,
				Rate:       0.5,
				Groups:     []string{"H1", "H2", "H3", "H4", "H5", "H6", "H7", "H8"},
				Events: []Event{
					{Kind: Drift, Duration: 4 * time.Hour, By: 0.12},
				},
			},
		},
	}
}
