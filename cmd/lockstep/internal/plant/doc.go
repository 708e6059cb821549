// Package plant is a seeded synthetic plant: parallel production groups
// (filling lines, sealing jaws, capping heads) that make the same product,
// with the shifts, spread changes, common drifts, silences and bad messages
// that lockstep has to tell apart. It does no I/O besides reading a scenario
// file: lockstep simulate publishes what it generates.
//
// A Scenario says what the plant makes (characteristics with a unit, a
// nominal, an instrument resolution, groups, a rate and a within-group
// standard deviation) and what happens to it (Events at offsets from the
// start). Coffee returns the built-in scenario; ParseScenario and
// LoadScenario read one from TOML. New turns a Scenario into a Generator,
// whose Next yields Messages (subject, JSON payload, simulated time, and the
// kind of a deliberately bad message) in event-time order across all
// groups. Pacer maps simulated time to wall time for live publishing.
//
// Reproducibility: every (characteristic, group) stream draws from its own
// PCG generator (math/rand/v2) seeded from the scenario's seed and the two
// names, so the same Scenario gives the same bytes, and adding or removing a
// group leaves the other groups' values as they were. Floating-point
// products are rounded explicitly, so that no platform fuses them.
//
// Caveats: the simulation has no time of its own beyond the Scenario's Start:
// with a Start in the past and Speed 0 it produces data faster than real
// time, which a daemon checking times against its clock may reject as
// coming from the future. Values are binary floating-point numbers written
// at the instrument resolution; the exact decimal digits are those written.
package plant
