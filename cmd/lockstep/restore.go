package main

import (
	"fmt"
	"math"
	"time"

	"github.com/lockstep-project/lockstep/stats"
	"github.com/lockstep-project/lockstep/store"
	"github.com/lockstep-project/lockstep/window"
)

// restore rebuilds the live state from the store at start: the applied
// cursor of the consumer; for every stored characteristic its reference
// (into the Validator, so that new values are centred as the stored sums
// are) and its window, from the stored bucket states of the last window
// length, lateness and two buckets, with the newest raw value's time as the
// window's latest event time. A characteristic whose bucket width, sample
// or count changed since its states were stored (its settings hash), or
// whose states do not fit, is rebuilt from its raw values instead and its
// bucket states are rewritten. Count-based windows keep no bucket states
// and are always rebuilt from the raw values of the last window length.
//
// The JetStream consumer then redelivers what was not acknowledged, and the
// cursor skips what was applied: nothing is lost and nothing counted twice.
func (d *daemon) restore(now time.Time) error {
	if err := d.alerts.restore(d.st); err != nil {
		return err
	}
	if d.consumer != "" {
		cur, err := d.st.Cursor(d.consumer)
		if err != nil {
			return fmt.Errorf("restore cursor of consumer %q: %w", d.consumer, err)
		}
		d.cursor = cur
		d.met.cursor.Store(cur)
	}
	recs, err := d.st.Characteristics()
	if err != nil {
		return fmt.Errorf("restore characteristics: %w", err)
	}
	for _, rec := range recs {
		if err := d.restoreChar(rec, now); err != nil {
			return err
		}
	}
	if err := d.restoreIDs(now); err != nil {
		return err
	}
	// Configured characteristics without data yet are listed too.
	for name := range d.cfg.Characteristics {
		if d.chars[name] == nil {
			if _, err := d.newChar(name); err != nil {
				return err
			}
		}
	}
	if err := d.flush(); err != nil {
		return fmt.Errorf("store rebuilt windows: %w", err)
	}
	d.log.Info().Int("characteristics", len(recs)).Uint64("cursor", d.cursor).Msg("state restored")
	return nil
}

// restoreChar restores one stored characteristic.
func (d *daemon) restoreChar(rec store.Characteristic, now time.Time) error {
	log := d.log.With().Str("characteristic", rec.Name).Logger()
	set := d.cfg.settingsFor(rec.Name)
	if !set.Configured && d.cfg.Ingest.Unknown == "reject" {
		log.Info().Msg("stored characteristic is no longer configured: its data stay in the store, it gets no live window")
		return nil
	}
	ref := stats.NewReference(rec.Reference)
	if err := d.val.SetReference(rec.Name, ref); err != nil {
		return fmt.Errorf("restore characteristic %q: %w; its stored sums are centred on %s: set its nominal to that, or start a new store",
			rec.Name, err, rec.Reference)
	}
	c, err := d.newChar(rec.Name)
	if err != nil {
		return err
	}
	c.ref, c.stored = ref, true
	if c.unit == "" {
		c.unit = rec.Unit
	}
	// The record is rewritten when the configured unit changed.
	unitChanged := set.Unit != "" && rec.Unit != set.Unit
	w := set.Window
	from := now.Add(-(w.Length + max(w.Lateness, 0) + 2*w.Bucket))

	fits := rec.SettingsHash == c.hash
	if fits && w.Count == 0 {
		n, err := d.restoreBuckets(c, from)
		if err == nil {
			log.Debug().Int("bucket_states", n).Msg("window restored")
			if unitChanged {
				d.pend.chars = append(d.pend.chars, d.record(c, rec))
			}
			return nil
		}
		log.Warn().Err(err).Msg("stored bucket states do not fit the window: rebuilding it from the raw values")
		fits = false
		if c.win, err = window.New(w); err != nil {
			return fmt.Errorf("restore characteristic %q: %w", rec.Name, err)
		}
	}
	if !fits {
		if rec.SettingsHash != c.hash {
			log.Info().Msg("bucket, sample or count changed: rebuilding the window from the raw values")
		}
		// The stored states have the old shape: none of them may be
		// restored again, so all go, and the rebuilt ones are written.
		if _, err := d.st.Retain(rec.Name, time.Time{}, time.Unix(0, math.MaxInt64)); err != nil {
			return fmt.Errorf("restore characteristic %q: remove its old bucket states: %w", rec.Name, err)
		}
	}
	n, skipped, err := d.rebuildFromRaw(c, from, w.Count == 0)
	if err != nil {
		return fmt.Errorf("restore characteristic %q from its raw values: %w", rec.Name, err)
	}
	if skipped > 0 {
		log.Warn().Int("skipped", skipped).Msg("raw values that no longer centre on the reference were skipped")
	}
	log.Info().Int("values", n).Msg("window rebuilt from the raw values")
	if !fits || unitChanged {
		d.pend.chars = append(d.pend.chars, d.record(c, rec))
	}
	return nil
}

// record is the stored record of c, updated to its settings.
func (d *daemon) record(c *liveChar, rec store.Characteristic) store.Characteristic {
	rec.Unit, rec.SettingsHash = c.unit, c.hash
	return rec
}

// restoreBuckets loads c's stored bucket states that start at or after from,
// then raises the window's latest event time to the newest raw value's.
func (d *daemon) restoreBuckets(c *liveChar, from time.Time) (int, error) {
	var newest time.Time
	n := 0
	err := d.st.Buckets(c.name, from, time.Time{}, func(bs store.BucketState) error {
		g := c.win.Group(bs.Group)
		if err := c.win.Restore(bs.Start, g, bs.Acc, bs.Sample); err != nil {
			return err
		}
		if bs.Start.After(newest) {
			newest = bs.Start
		}
		n++
		return nil
	})
	if err != nil || n == 0 {
		return n, err
	}
	var latest time.Time
	err = d.st.Raw(c.name, newest, time.Time{}, func(rv store.RawValue) error {
		if rv.Time.After(latest) {
			latest = rv.Time
		}
		return nil
	})
	if err != nil {
		return n, fmt.Errorf("find the newest raw value: %w", err)
	}
	c.win.SetLatest(latest)
	return n, nil
}

// rebuildFromRaw adds c's raw values from from on to its (empty) window and,
// when states is true, marks the buckets they fill for the next commit.
func (d *daemon) rebuildFromRaw(c *liveChar, from time.Time, states bool) (n, skipped int, err error) {
	err = d.st.Raw(c.name, from, time.Time{}, func(rv store.RawValue) error {
		v, exact, err := c.ref.CentreString(rv.Text)
		if err != nil {
			skipped++
			return nil
		}
		g := c.win.Group(rv.Group)
		if c.win.Add(g, rv.Time, v) == window.Added && states {
			d.pend.touched[touchKey{c: c, start: c.win.BucketStart(rv.Time).UnixNano(), group: g}] = struct{}{}
		}
		if !exact {
			c.inexact++
		}
		n++
		return nil
	})
	return n, skipped, err
}

// restoreIDs gives the Validator's duplicate-id memory the ids of each
// restored characteristic's raw values over the span its window is restored
// from, oldest first, so that a measurement published again across a
// restart is still rejected as duplicate_id (within that span, and as far as
// the memory's size reaches).
func (d *daemon) restoreIDs(now time.Time) error {
	var id []byte
	for _, c := range d.order {
		w := c.set.Window
		from := now.Add(-(w.Length + max(w.Lateness, 0) + 2*w.Bucket))
		err := d.st.Raw(c.name, from, time.Time{}, func(rv store.RawValue) error {
			id = append(id[:0], rv.ID...)
			d.val.RememberID(c.name, id)
			return nil
		})
		if err != nil {
			return fmt.Errorf("restore the recent ids of characteristic %q: %w", c.name, err)
		}
	}
	return nil
}
