package ingest

import (
	"encoding/json"
	"errors"
	"fmt"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/lockstep-project/lockstep/stats"
)

// TestReasonLabels pins the metric labels: dashboards and alerts depend on
// them, so a change here is a breaking change.
func TestReasonLabels(t *testing.T) {
	want := []string{"not_parseable", "not_a_number", "not_finite", "out_of_range", "wrong_unit",
		"from_future", "too_old", "unknown_characteristic", "duplicate_id", "no_group"}
	var got []string
	for r := range Reasons() {
		got = append(got, r.String())
		if p, ok := ParseReason(r.String()); !ok || p != r {
			t.Errorf("ParseReason(%q) = %v, %v", r, p, ok)
		}
	}
	if strings.Join(got, " ") != strings.Join(want, " ") {
		t.Errorf("labels %v, want %v", got, want)
	}
	if ReasonNone.String() != "none" || Reason(200).String() != "reason(200)" {
		t.Errorf("ReasonNone %q, Reason(200) %q", ReasonNone, Reason(200))
	}
	if _, ok := ParseReason("bogus"); ok {
		t.Error("ParseReason(bogus) found a reason")
	}
}

func TestReasonOf(t *testing.T) {
	_, syntax := stats.ParseDecimal("12,5")
	_, nan := stats.ParseDecimal("NaN")
	_, big := stats.ParseDecimal("1e400")
	for _, c := range []struct {
		err  error
		want Reason
	}{
		{nil, ReasonNone},
		{&PayloadError{Err: ErrMalformed}, ReasonNotParseable},
		{&PayloadError{Err: ErrLimit}, ReasonNotParseable},
		{&PayloadError{Err: ErrNoValue}, ReasonNotParseable},
		{&PayloadError{Err: ErrBadTime}, ReasonNotParseable},
		{&PayloadError{Err: ErrBadField}, ReasonNotParseable},
		{&PayloadError{Err: ErrNotNumber}, ReasonNotANumber},
		{syntax, ReasonNotANumber},
		{nan, ReasonNotFinite},
		{big, ReasonOutOfRange},
		{fmt.Errorf("wrapped: %w", &RejectError{Reason: ReasonDuplicateID}), ReasonDuplicateID},
		{errors.New("something else"), ReasonNotParseable},
	} {
		if got := ReasonOf(c.err); got != c.want {
			t.Errorf("ReasonOf(%v) = %v, want %v", c.err, got, c.want)
		}
	}
}

func TestRejectMessage(t *testing.T) {
	at := time.Date(2026, 3, 1, 9, 0, 0, 250000000, time.FixedZone("", 3600))
	err := &RejectError{Reason: ReasonNotANumber, Msg: `value "12,5" is not a number; use '.' as the decimal separator`}
	b := RejectMessage(ReasonNotANumber, err, "meas.fill-weight.L3", []byte(`{"value": "12,5"}`), at)
	var got map[string]any
	if e := json.Unmarshal(b, &got); e != nil {
		t.Fatalf("not JSON: %v: %s", e, b)
	}
	want := map[string]any{
		"reason":  "not_a_number",
		"error":   err.Error(),
		"subject": "meas.fill-weight.L3",
		"payload": `{"value": "12,5"}`,
		"time":    "2026-03-01T08:00:00.25Z",
	}
	if fmt.Sprint(got) != fmt.Sprint(want) {
		t.Errorf("dead letter\n got %v\nwant %v", got, want)
	}

	// A long payload is cut at a rune boundary; invalid UTF-8 still gives
	// valid JSON; a nil error gives an empty "error".
	long := []byte(strings.Repeat("é", MaxRejectPayload) + "\xff")
	b = RejectMessage(ReasonNotParseable, nil, "meas.x.y", long, at)
	var body rejectBody
	if e := json.Unmarshal(b, &body); e != nil {
		t.Fatalf("not JSON: %v", e)
	}
	if !body.PayloadTruncated || len(body.Payload) != MaxRejectPayload || body.Error != "" {
		t.Errorf("truncated %v, %d bytes, error %q; want true, %d, empty", body.PayloadTruncated, len(body.Payload), body.Error, MaxRejectPayload)
	}
	b = RejectMessage(ReasonNotParseable, nil, "meas.x.y", []byte("a\xffb"), at)
	body = rejectBody{}
	if e := json.Unmarshal(b, &body); e != nil || body.Payload != "a\uFFFDb" || body.PayloadTruncated {
		t.Errorf("invalid UTF-8: %v %+v", e, body)
	}
}

func TestDeadLetterSubject(t *testing.T) {
	for _, c := range []struct{ prefix, char, want string }{
		{"lockstep", "fill-weight", "lockstep.rejects.fill-weight"},
		{"lockstep", "", "lockstep.rejects.unknown"},
		{"", "cap_torque", "rejects.cap_torque"},
		{"plant.north.", "seal temp", "plant.north.rejects.seal_temp"},
		{"a..b", "x.y*>", "a.b.rejects.x_y__"},
		{"lock step", "Füllgewicht\t", "lock_step.rejects.F_llgewicht_"},
		{"*", ">", "_.rejects._"},
		{"ls", strings.Repeat("x", 200), "ls.rejects." + strings.Repeat("x", 128)},
	} {
		if got := DeadLetterSubject(c.prefix, c.char); got != c.want {
			t.Errorf("DeadLetterSubject(%q, %q) = %q, want %q", c.prefix, c.char, got, c.want)
		}
	}
}

// TestCountersConcurrent counts from several goroutines while another
// reads; run with -race.
func TestCountersConcurrent(t *testing.T) {
	var c Counters
	var wg sync.WaitGroup
	for g := range 4 {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range 1000 {
				c.Add(Reason((g + i) % int(numReasons)))
			}
		}()
	}
	done := make(chan struct{})
	go func() {
		defer close(done)
		for range 100 {
			_ = c.RejectedTotal() + c.Accepted()
		}
	}()
	wg.Wait()
	<-done
	if total := c.Accepted() + c.RejectedTotal(); total != 4000 {
		t.Errorf("counted %d, want 4000", total)
	}
	c.Add(Reason(250)) // no such reason: ignored
	if c.Rejected(ReasonNone) != 0 || c.Rejected(Reason(250)) != 0 {
		t.Error("Rejected counts ReasonNone or an invalid reason")
	}
}
