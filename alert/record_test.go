package alert

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"
	"time"
)

func sampleAlert() Alert {
	return Alert{
		ID: AlertID("fill-weight", KindMeansDiverge, "", at(1)), Characteristic: "fill-weight", Kind: KindMeansDiverge,
		State: StateAcknowledged, Groups: []string{"L3", "L4"}, Direction: -1,
		Shift: -0.42, Lower: -0.61, Upper: -0.23, Unit: "g", Test: "Welch F", F: 9.5, P: 3.2e-5, Effect: 0.11,
		Ratio: 1.2, RejectRate: 0.001, Detector: "F 5m, CUSUM", From: at(-4), To: at(1),
		Reason: "L3 and L4 are low", Opened: at(1), Raised: at(3), Acknowledged: at(4),
		AcknowledgedBy: "Ana", Note: "scale checked", Updated: at(4),
	}
}

func TestRecordRoundTrip(t *testing.T) {
	for _, a := range []Alert{
		sampleAlert(),
		{ID: "x", Kind: KindGroupSilent, Key: "L2", State: StateCleared, Shift: math.NaN(), Cleared: at(9)},
	} {
		b := EncodeRecord(nil, &a)
		got, err := DecodeRecord(b)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(EncodeRecord(nil, &got), b) {
			t.Errorf("round trip of %+v changed it to %+v", a, got)
		}
		if got.ID != a.ID || got.State != a.State || !got.Opened.Equal(a.Opened) || !got.Cleared.Equal(a.Cleared) || len(got.Groups) != len(a.Groups) {
			t.Errorf("decoded %+v, want %+v", got, a)
		}
	}
	a := sampleAlert()
	if n := len(EncodeRecord(nil, &a)); n > 250 {
		t.Errorf("record of %d bytes; compact means well under 250 for this alert", n)
	}
}

func TestRecordErrors(t *testing.T) {
	a := sampleAlert()
	good := EncodeRecord(nil, &a)
	bad := map[string][]byte{
		"empty":       nil,
		"version":     append([]byte{9}, good[1:]...),
		"kind":        append([]byte{1, 0}, good[2:]...),
		"state":       append([]byte{1, 1, 7}, good[3:]...),
		"truncated":   good[:len(good)-3],
		"trailing":    append(append([]byte{}, good...), 0),
		"huge string": {1, 1, 1, 0xff, 0xff, 0xff, 0x7f},
		"huge groups": append(EncodeRecord(nil, &Alert{ID: "x", Kind: 1, State: 1})[:12], 0xff, 0xff, 0x7f),
	}
	for name, b := range bad {
		if _, err := DecodeRecord(b); !errors.Is(err, ErrRecord) {
			t.Errorf("%s: %v, want ErrRecord", name, err)
		}
	}
}

func FuzzDecodeRecord(f *testing.F) {
	a := sampleAlert()
	f.Add(EncodeRecord(nil, &a))
	f.Add([]byte{1, 1, 1})
	f.Fuzz(func(t *testing.T, b []byte) {
		a, err := DecodeRecord(b)
		if err != nil {
			return
		}
		// What decodes encodes to the same bytes, except for times that
		// came from 0 (none) and for NaN payloads, which are kept bitwise.
		again, err := DecodeRecord(EncodeRecord(nil, &a))
		if err != nil || !reflect.DeepEqual(stripNaN(again), stripNaN(a)) {
			t.Fatalf("re-encoding %+v gave %+v, %v", a, again, err)
		}
	})
}

func stripNaN(a Alert) Alert {
	for _, p := range []*float64{&a.Shift, &a.Lower, &a.Upper, &a.F, &a.P, &a.Effect, &a.Ratio, &a.RejectRate} {
		if math.IsNaN(*p) {
			*p = 0
		}
	}
	return a
}

func TestEventJSONSchema(t *testing.T) {
	a := sampleAlert()
	ev := Event{ID: eventID(a.ID, TransitionAcknowledged, at(4)), Time: at(4), Transition: TransitionAcknowledged, Previous: StateRaised, Alert: a}
	b, err := json.Marshal(ev)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"event", "time", "transition", "previous", "alert"} {
		if _, ok := m[k]; !ok {
			t.Errorf("event JSON lacks %q: %s", k, b)
		}
	}
	if len(m) != 5 {
		t.Errorf("event JSON has %d keys, want 5: %s", len(m), b)
	}
	al := m["alert"].(map[string]any)
	want := strings.Fields(`id characteristic kind key state groups direction shift lower upper unit test f p effect
		ratio reject_rate detector window reason opened raised acknowledged acknowledged_by note cleared updated`)
	for _, k := range want {
		if _, ok := al[k]; !ok {
			t.Errorf("alert JSON lacks %q", k)
		}
	}
	if len(al) != len(want) {
		t.Errorf("alert JSON has %d keys, want %d: %s", len(al), len(want), b)
	}
	if al["state"] != "acknowledged" || m["previous"] != "raised" || m["transition"] != "acknowledged" || al["kind"] != "means-diverge" {
		t.Errorf("names: %s", b)
	}
	if al["cleared"] != nil || al["opened"] != "2026-12-01T06:01:00Z" {
		t.Errorf("times: cleared %v (want null), opened %v", al["cleared"], al["opened"])
	}
	if w := al["window"].(map[string]any); w["from"] != "2026-12-01T05:56:00Z" || w["to"] != "2026-12-01T06:01:00Z" {
		t.Errorf("window %v", w)
	}
	var back Event
	if err := json.Unmarshal(b, &back); err != nil {
		t.Fatal(err)
	}
	if back.ID != ev.ID || back.Alert.ID != a.ID || back.Alert.Shift != a.Shift || !back.Alert.Acknowledged.Equal(a.Acknowledged) ||
		back.Previous != StateRaised || back.Alert.State != StateAcknowledged {
		t.Errorf("decoded %+v, want %+v", back, ev)
	}
	// Not finite numbers are null, and an alert without groups has [].
	nan := Alert{ID: "x", Kind: KindInputRejected, State: StateWatch, F: math.NaN(), Opened: time.Unix(1, 0)}
	b, _ = json.Marshal(nan)
	if !strings.Contains(string(b), `"f":null`) || !strings.Contains(string(b), `"groups":[]`) {
		t.Errorf("alert JSON %s: want f null and groups []", b)
	}
}

func FuzzEventJSON(f *testing.F) {
	a := sampleAlert()
	b, _ := json.Marshal(Event{ID: "e", Time: at(1), Transition: TransitionRaised, Previous: StateWatch, Alert: a})
	f.Add(b)
	f.Add([]byte(`{"event":"x","transition":"bogus"}`))
	f.Fuzz(func(t *testing.T, b []byte) {
		var e Event
		if err := json.Unmarshal(b, &e); err != nil {
			return
		}
		out, err := json.Marshal(e)
		if err != nil {
			t.Fatalf("re-encode: %v", err)
		}
		var again Event
		if err := json.Unmarshal(out, &again); err != nil {
			t.Fatalf("decode what was encoded %s: %v", out, err)
		}
	})
}
