package ingest

import (
	"bytes"
	"strings"
	"testing"
)

// natsMatch reports whether subject matches the NATS subscription filter:
// tokens equal, '*' for any one token, '>' for one or more final tokens.
// It is written independently of Match, from the NATS subject rules.
func natsMatch(filter string, subject []byte) bool {
	ft := strings.Split(filter, ".")
	st := strings.Split(string(subject), ".")
	for i, f := range ft {
		if f == ">" {
			return len(st) > i
		}
		if i >= len(st) || (f != "*" && f != st[i]) {
			return false
		}
	}
	return len(st) == len(ft)
}

// FuzzSubjectMatch parses arbitrary templates and matches arbitrary
// subjects. Neither may panic; a template that parses has a valid filter
// and a <characteristic>; Match must agree with the NATS rules for the
// filter (on subjects without empty tokens), return views into the
// subject, and put the named tokens where the template says.
func FuzzSubjectMatch(f *testing.F) {
	for _, seed := range [][2]string{
		{DefaultSubjectTemplate, "meas.fill-weight.L3"},
		{"plant.<site>.<cell>.<characteristic>.<group>", "plant.north.c7.seal-temp.J2"},
		{"meas.*.<characteristic>.>", "meas.x.cap-torque.a.b"},
		{"meas.<characteristic>.>", "meas.cap-torque"},
		{"meas..<characteristic>", "meas..x"},
		{"<characteristic>.<group>", "a..b"},
		{"meas.<characteristic>.<characteristic>", "meas.a.a"},
		{"<characteristic>", ""},
	} {
		f.Add(seed[0], []byte(seed[1]))
	}
	f.Fuzz(func(t *testing.T, tmpl string, subject []byte) {
		tm, err := ParseSubjectTemplate(tmpl)
		if err != nil {
			if tm != nil {
				t.Fatal("template returned with an error")
			}
			return
		}
		filter := tm.Filter()
		ft := strings.Split(filter, ".")
		for i, tok := range ft {
			if tok == "" || (tok != "*" && tok != ">" && strings.ContainsAny(tok, "*> \t\r\n")) || (tok == ">" && i != len(ft)-1) {
				t.Fatalf("template %q: invalid filter %q", tmpl, filter)
			}
		}
		if !strings.Contains(tmpl, "<characteristic>") {
			t.Fatalf("template %q parsed without <characteristic>", tmpl)
		}

		orig := bytes.Clone(subject)
		m, ok := tm.Match(subject)
		if !bytes.Equal(subject, orig) {
			t.Fatal("Match modified the subject")
		}
		if want := validTokensSlow(subject) && natsMatch(filter, subject); ok != want {
			t.Fatalf("template %q (filter %q), subject %q: Match %v, NATS rules say %v", tmpl, filter, subject, ok, want)
		}
		if !ok {
			if m.Characteristic != nil || m.Group != nil || len(m.Labels()) != 0 {
				t.Fatalf("no match, but %+v", m)
			}
			return
		}
		views := [][]byte{m.Characteristic, m.Group}
		for _, l := range m.Labels() {
			views = append(views, l.Value)
		}
		for _, v := range views {
			if !within(v, subject) || bytes.IndexByte(v, '.') >= 0 {
				t.Fatalf("view %q is not one token of the subject %q", v, subject)
			}
		}
		if len(m.Characteristic) == 0 || (tm.HasGroup() != (m.Group != nil)) || len(m.Labels()) != len(tm.LabelNames()) {
			t.Fatalf("template %q, subject %q: incomplete match %+v", tmpl, subject, m)
		}
		st := strings.Split(string(subject), ".")
		for i, tok := range strings.Split(tmpl, ".") {
			var v []byte
			switch {
			case tok == "<characteristic>":
				v = m.Characteristic
			case tok == "<group>":
				v = m.Group
			case strings.HasPrefix(tok, "<"):
				v, _ = m.Label(strings.Trim(tok, "<>"))
			default:
				continue
			}
			if string(v) != st[i] {
				t.Fatalf("template %q, subject %q: token %d is %q, match says %q", tmpl, subject, i+1, st[i], v)
			}
		}
	})
}

// validTokensSlow reports whether subject is one or more non-empty tokens.
func validTokensSlow(subject []byte) bool {
	for _, tok := range strings.Split(string(subject), ".") {
		if tok == "" {
			return false
		}
	}
	return true
}
