package alert

import (
	"encoding/json"
	"fmt"
	"math"
	"time"
)

// The JSON of an alert and of an event, the schema of the NATS subject
// PREFIX.alerts.CHARACTERISTIC, the webhook, the HTTP API and the
// dashboard (README.md, section Alerts, has an example):
//
//	alert: {"id", "characteristic", "kind", "key", "state", "groups",
//	        "direction", "shift", "lower", "upper", "unit", "test", "f", "p",
//	        "effect", "ratio", "reject_rate", "detector",
//	        "window": {"from", "to"}, "reason", "opened", "raised",
//	        "acknowledged", "acknowledged_by", "note", "cleared", "updated"}
//	event: {"event", "time", "transition", "previous", "alert"}
//
// Times are RFC 3339 in UTC, null when not (yet) set; numbers that are not
// finite are null; "groups" is always an array; "previous" is "" for the
// event that opened the alert.

type alertJSON struct {
	ID             string     `json:"id"`
	Characteristic string     `json:"characteristic"`
	Kind           string     `json:"kind"`
	Key            string     `json:"key"`
	State          string     `json:"state"`
	Groups         []string   `json:"groups"`
	Direction      int        `json:"direction"`
	Shift          jsonFloat  `json:"shift"`
	Lower          jsonFloat  `json:"lower"`
	Upper          jsonFloat  `json:"upper"`
	Unit           string     `json:"unit"`
	Test           string     `json:"test"`
	F              jsonFloat  `json:"f"`
	P              jsonFloat  `json:"p"`
	Effect         jsonFloat  `json:"effect"`
	Ratio          jsonFloat  `json:"ratio"`
	RejectRate     jsonFloat  `json:"reject_rate"`
	Detector       string     `json:"detector"`
	Window         windowJSON `json:"window"`
	Reason         string     `json:"reason"`
	Opened         jsonTime   `json:"opened"`
	Raised         jsonTime   `json:"raised"`
	Acknowledged   jsonTime   `json:"acknowledged"`
	AcknowledgedBy string     `json:"acknowledged_by"`
	Note           string     `json:"note"`
	Cleared        jsonTime   `json:"cleared"`
	Updated        jsonTime   `json:"updated"`
}

type windowJSON struct {
	From jsonTime `json:"from"`
	To   jsonTime `json:"to"`
}

type eventJSON struct {
	Event      string    `json:"event"`
	Time       jsonTime  `json:"time"`
	Transition string    `json:"transition"`
	Previous   string    `json:"previous"`
	Alert      alertJSON `json:"alert"`
}

// jsonTime is a time in RFC 3339 (UTC, with the fraction of a second it
// has), null when zero.
type jsonTime time.Time

func (t jsonTime) MarshalJSON() ([]byte, error) {
	tt := time.Time(t)
	if tt.IsZero() {
		return []byte("null"), nil
	}
	return []byte(`"` + tt.UTC().Format(time.RFC3339Nano) + `"`), nil
}

func (t *jsonTime) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*t = jsonTime{}
		return nil
	}
	var s string
	if err := json.Unmarshal(b, &s); err != nil {
		return fmt.Errorf("time: %w", err)
	}
	tt, err := time.Parse(time.RFC3339Nano, s)
	if err != nil {
		return fmt.Errorf("time %q: not RFC 3339", s)
	}
	*t = jsonTime(tt.UTC())
	return nil
}

// jsonFloat is a number, null when not finite.
type jsonFloat float64

func (f jsonFloat) MarshalJSON() ([]byte, error) {
	x := float64(f)
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return []byte("null"), nil
	}
	return json.Marshal(x)
}

func (f *jsonFloat) UnmarshalJSON(b []byte) error {
	if string(b) == "null" {
		*f = jsonFloat(math.NaN())
		return nil
	}
	var x float64
	if err := json.Unmarshal(b, &x); err != nil {
		return err
	}
	*f = jsonFloat(x)
	return nil
}

func toJSON(a *Alert) alertJSON {
	g := a.Groups
	if g == nil {
		g = []string{}
	}
	return alertJSON{
		ID: a.ID, Characteristic: a.Characteristic, Kind: a.Kind.String(), Key: a.Key, State: a.State.String(),
		Groups: g, Direction: a.Direction,
		Shift: jsonFloat(a.Shift), Lower: jsonFloat(a.Lower), Upper: jsonFloat(a.Upper), Unit: a.Unit,
		Test: a.Test, F: jsonFloat(a.F), P: jsonFloat(a.P), Effect: jsonFloat(a.Effect),
		Ratio: jsonFloat(a.Ratio), RejectRate: jsonFloat(a.RejectRate), Detector: a.Detector,
		Window: windowJSON{From: jsonTime(a.From), To: jsonTime(a.To)}, Reason: a.Reason,
		Opened: jsonTime(a.Opened), Raised: jsonTime(a.Raised), Acknowledged: jsonTime(a.Acknowledged),
		AcknowledgedBy: a.AcknowledgedBy, Note: a.Note, Cleared: jsonTime(a.Cleared), Updated: jsonTime(a.Updated),
	}
}

func fromJSON(j *alertJSON) (Alert, error) {
	kind := ParseKind(j.Kind)
	if kind == KindNone {
		return Alert{}, fmt.Errorf("decode alert %q: unknown kind %q", j.ID, j.Kind)
	}
	state, ok := ParseState(j.State)
	if !ok {
		return Alert{}, fmt.Errorf("decode alert %q: unknown state %q", j.ID, j.State)
	}
	return Alert{
		ID: j.ID, Characteristic: j.Characteristic, Kind: kind, Key: j.Key, State: state,
		Groups: j.Groups, Direction: j.Direction,
		Shift: float64(j.Shift), Lower: float64(j.Lower), Upper: float64(j.Upper), Unit: j.Unit,
		Test: j.Test, F: float64(j.F), P: float64(j.P), Effect: float64(j.Effect),
		Ratio: float64(j.Ratio), RejectRate: float64(j.RejectRate), Detector: j.Detector,
		From: time.Time(j.Window.From), To: time.Time(j.Window.To), Reason: j.Reason,
		Opened: time.Time(j.Opened), Raised: time.Time(j.Raised), Acknowledged: time.Time(j.Acknowledged),
		AcknowledgedBy: j.AcknowledgedBy, Note: j.Note, Cleared: time.Time(j.Cleared), Updated: time.Time(j.Updated),
	}, nil
}

// MarshalJSON writes the alert in the schema above.
func (a Alert) MarshalJSON() ([]byte, error) { return json.Marshal(toJSON(&a)) }

// UnmarshalJSON reads an alert in the schema above; an unknown kind or
// state is an error. Numbers written as null come back as NaN.
func (a *Alert) UnmarshalJSON(b []byte) error {
	var j alertJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return fmt.Errorf("decode alert: %w", err)
	}
	x, err := fromJSON(&j)
	if err != nil {
		return err
	}
	*a = x
	return nil
}

// MarshalJSON writes the event in the schema above.
func (e Event) MarshalJSON() ([]byte, error) {
	return json.Marshal(eventJSON{
		Event: e.ID, Time: jsonTime(e.Time), Transition: e.Transition.String(), Previous: e.Previous.String(),
		Alert: toJSON(&e.Alert),
	})
}

// UnmarshalJSON reads an event in the schema above.
func (e *Event) UnmarshalJSON(b []byte) error {
	var j eventJSON
	if err := json.Unmarshal(b, &j); err != nil {
		return fmt.Errorf("decode alert event: %w", err)
	}
	t, ok := ParseTransition(j.Transition)
	if !ok {
		return fmt.Errorf("decode alert event %q: unknown transition %q", j.Event, j.Transition)
	}
	prev := StateNone
	if j.Previous != "" {
		if prev, ok = ParseState(j.Previous); !ok {
			return fmt.Errorf("decode alert event %q: unknown previous state %q", j.Event, j.Previous)
		}
	}
	a, err := fromJSON(&j.Alert)
	if err != nil {
		return fmt.Errorf("decode alert event %q: %w", j.Event, err)
	}
	*e = Event{ID: j.Event, Time: time.Time(j.Time), Transition: t, Previous: prev, Alert: a}
	return nil
}
