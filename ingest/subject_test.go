package ingest

import (
	"errors"
	"strings"
	"testing"
)

func TestParseSubjectTemplate(t *testing.T) {
	good := []struct {
		tmpl, filter string
		group        bool
		labels       []string
	}{
		{DefaultSubjectTemplate, "meas.*.*", true, nil},
		{"plant.<site>.<cell>.<characteristic>.<group>", "plant.*.*.*.*", true, []string{"site", "cell"}},
		{"<characteristic>", "*", false, nil},
		{"meas.*.<characteristic>.>", "meas.*.*.>", false, nil},
		{"$lockstep.v1.<characteristic>.<group>.<line_no-2>", "$lockstep.v1.*.*.*", true, []string{"line_no-2"}},
		{"meas.<group>.<characteristic>", "meas.*.*", true, nil},
	}
	for _, tt := range good {
		tm, err := ParseSubjectTemplate(tt.tmpl)
		if err != nil {
			t.Errorf("ParseSubjectTemplate(%q): %v", tt.tmpl, err)
			continue
		}
		if tm.Filter() != tt.filter || tm.HasGroup() != tt.group || tm.String() != tt.tmpl ||
			strings.Join(tm.LabelNames(), ",") != strings.Join(tt.labels, ",") {
			t.Errorf("%q: filter %q group %v labels %v, want %q %v %v",
				tt.tmpl, tm.Filter(), tm.HasGroup(), tm.LabelNames(), tt.filter, tt.group, tt.labels)
		}
	}

	bad := []struct{ tmpl, says string }{
		{"", "empty"},
		{"meas.<group>", "no <characteristic>"},
		{"meas.*.*", "no <characteristic>"},
		{"meas.<characteristic>.<characteristic>", "more than once"},
		{"meas.<site>.<characteristic>.<site>", "more than once"},
		{"meas..<characteristic>", "token 2 is empty"},
		{".meas.<characteristic>", "token 1 is empty"},
		{"meas.<characteristic>.", "token 3 is empty"},
		{"meas.>.<characteristic>", "only be the last"},
		{"meas.<characteristic>.a>b", "may not contain '>'"},
		{"meas.<Characteristic>", "named token"},
		{"meas.<characteristic", "named token"},
		{"meas.<>.<characteristic>", "named token"},
		{"meas.<1st>.<characteristic>", "named token"},
		{"meas.<characteristic>.x*", "may not contain '*'"},
		{"meas.<characteristic>.a b", "may not contain ' '"},
		{"m.<characteristic>.<a>.<b>.<c>.<d>.<e>.<f>.<g>.<h>.<i>", "more than 8 labels"},
	}
	for _, tt := range bad {
		tm, err := ParseSubjectTemplate(tt.tmpl)
		if err == nil {
			t.Errorf("ParseSubjectTemplate(%q) = %v, want an error", tt.tmpl, tm.Filter())
			continue
		}
		if !errors.Is(err, ErrTemplate) || !strings.Contains(err.Error(), tt.says) {
			t.Errorf("ParseSubjectTemplate(%q): %q, want ErrTemplate saying %q", tt.tmpl, err, tt.says)
		}
	}
}

func TestSubjectMatch(t *testing.T) {
	type want struct {
		ok          bool
		char, group string
		labels      string // name=value, comma-separated
	}
	tests := []struct {
		tmpl, subject string
		want          want
	}{
		{DefaultSubjectTemplate, "meas.fill-weight.L3", want{true, "fill-weight", "L3", ""}},
		{DefaultSubjectTemplate, "meas.fill-weight", want{}},
		{DefaultSubjectTemplate, "meas.fill-weight.L3.x", want{}},
		{DefaultSubjectTemplate, "other.fill-weight.L3", want{}},
		{DefaultSubjectTemplate, "meas..L3", want{}},
		{DefaultSubjectTemplate, "meas.fill-weight.", want{}},
		{DefaultSubjectTemplate, ".meas.fill-weight.L3", want{}},
		{DefaultSubjectTemplate, "", want{}},
		{"plant.<site>.<cell>.<characteristic>.<group>", "plant.north.c7.seal-temp.J2",
			want{true, "seal-temp", "J2", "site=north,cell=c7"}},
		{"meas.*.<characteristic>", "meas.anything.cap-torque", want{true, "cap-torque", "", ""}},
		{"meas.<characteristic>.>", "meas.nozzle-flow.a.b.c", want{true, "nozzle-flow", "", ""}},
		{"meas.<characteristic>.>", "meas.nozzle-flow.a", want{true, "nozzle-flow", "", ""}},
		{"meas.<characteristic>.>", "meas.nozzle-flow", want{}},
		{"meas.<characteristic>.>", "meas.nozzle-flow.", want{}},
		{"meas.<characteristic>.>", "meas.nozzle-flow.a..b", want{}},
		{"meas.<characteristic>.>", "meas.nozzle-flow.a.", want{}},
		{"<characteristic>", "x", want{true, "x", "", ""}},
		{"<characteristic>", "x.y", want{}},
	}
	for _, tt := range tests {
		tm, err := ParseSubjectTemplate(tt.tmpl)
		if err != nil {
			t.Fatal(err)
		}
		m, ok := tm.Match([]byte(tt.subject))
		var labels []string
		for _, l := range m.Labels() {
			labels = append(labels, l.Name+"="+string(l.Value))
		}
		g := want{ok, string(m.Characteristic), string(m.Group), strings.Join(labels, ",")}
		if !ok {
			g = want{ok: ok}
		}
		if g != tt.want {
			t.Errorf("%q.Match(%q) = %+v, want %+v", tt.tmpl, tt.subject, g, tt.want)
		}
		if ok && tt.want.group == "" && m.Group != nil {
			t.Errorf("%q.Match(%q): Group %q, want nil", tt.tmpl, tt.subject, m.Group)
		}
	}

	tm, _ := ParseSubjectTemplate("plant.<site>.<characteristic>.<group>")
	m, _ := tm.Match([]byte("plant.north.fill-weight.L1"))
	if v, ok := m.Label("site"); !ok || string(v) != "north" {
		t.Errorf("Label(site) = %q, %v", v, ok)
	}
	if _, ok := m.Label("cell"); ok {
		t.Error("Label(cell) found in a template without it")
	}
}

func TestSubjectMatchDoesNotAllocate(t *testing.T) {
	tm, err := ParseSubjectTemplate("plant.<site>.<characteristic>.<group>")
	if err != nil {
		t.Fatal(err)
	}
	subject := []byte("plant.north.fill-weight.L3")
	var sink SubjectMatch
	if n := testing.AllocsPerRun(100, func() { sink, _ = tm.Match(subject) }); n != 0 {
		t.Errorf("%v allocations per Match, want 0", n)
	}
	_ = sink
}
