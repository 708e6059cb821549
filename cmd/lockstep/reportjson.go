package main

import (
	"encoding/json"
	"math"

	"github.com/lockstep-project/lockstep/stats"
)

// The JSON form of a report. The field names below are a published
// interface (README, "JSON output"): add fields freely, never rename these.
// A value that is not available is null, with its reason in notes.
type jsonReport struct {
	Source        string      `json:"source,omitempty"`
	Unit          string      `json:"unit,omitempty"`
	Reference     string      `json:"reference"`
	Rows          int64       `json:"rows"`
	Inexact       int64       `json:"inexact_values"`
	Options       jsonOptions `json:"options"`
	Groups        []jsonGroup `json:"groups"`
	GrandMean     *float64    `json:"grand_mean"`
	Anova         jsonAnova   `json:"anova"`
	Welch         *jsonF      `json:"welch"`
	Bartlett      *jsonChi    `json:"bartlett"`
	Levene        *jsonF      `json:"levene"`
	BrownForsythe *jsonF      `json:"brown_forsythe"`
	KruskalWallis *jsonKW     `json:"kruskal_wallis"`
	Pairs         []jsonPair  `json:"pairs"`
	Means         *jsonMeans  `json:"analysis_of_means"`
	Shift         *jsonShift  `json:"minimum_detectable_shift"`
	Verdict       jsonVerdict `json:"verdict"`
	Notes         []string    `json:"notes"`
}

type jsonOptions struct {
	Alpha      float64 `json:"alpha"`
	Confidence float64 `json:"confidence"`
	Power      float64 `json:"power"`
}

type jsonGroup struct {
	Name       string   `json:"name"`
	N          int64    `json:"n"`
	Mean       *float64 `json:"mean"`
	SD         *float64 `json:"sd"`
	CILower    *float64 `json:"ci_lower"`
	CIUpper    *float64 `json:"ci_upper"`
	Min        *float64 `json:"min"`
	Max        *float64 `json:"max"`
	ValuesKept int      `json:"values_kept,omitempty"`
	Sampled    bool     `json:"sampled,omitempty"`
}

type jsonAnova struct {
	SSBetween  *float64 `json:"ss_between"`
	SSWithin   *float64 `json:"ss_within"`
	SSTotal    *float64 `json:"ss_total"`
	DFBetween  *float64 `json:"df_between"`
	DFWithin   *float64 `json:"df_within"`
	DFTotal    *float64 `json:"df_total"`
	MSBetween  *float64 `json:"ms_between"`
	MSWithin   *float64 `json:"ms_within"`
	F          *float64 `json:"f"`
	P          *float64 `json:"p"`
	R2         *float64 `json:"r2"`
	AdjR2      *float64 `json:"adj_r2"`
	Omega2     *float64 `json:"omega2"`
	ResidualSD *float64 `json:"residual_sd"`
}

type jsonF struct {
	F   *float64 `json:"f"`
	DF1 *float64 `json:"df1"`
	DF2 *float64 `json:"df2"`
	P   *float64 `json:"p"`
}

type jsonChi struct {
	Statistic *float64 `json:"statistic"`
	DF        *float64 `json:"df"`
	P         *float64 `json:"p"`
}

type jsonKW struct {
	H  *float64 `json:"h"`
	DF *float64 `json:"df"`
	P  *float64 `json:"p"`
}

type jsonPair struct {
	A           string     `json:"a"`
	B           string     `json:"b"`
	Diff        *float64   `json:"diff"`
	Tukey       *jsonTukey `json:"tukey"`
	GamesHowell *jsonGH    `json:"games_howell"`
}

type jsonTukey struct {
	Lwr *float64 `json:"lwr"`
	Upr *float64 `json:"upr"`
	P   *float64 `json:"p"`
}

type jsonGH struct {
	DF *float64 `json:"df"`
	P  *float64 `json:"p"`
}

type jsonMeans struct {
	Method string          `json:"method"`
	Alpha  float64         `json:"alpha"`
	H      *float64        `json:"h"`
	Groups []jsonDeviation `json:"groups"`
}

type jsonDeviation struct {
	Name      string   `json:"name"`
	Deviation *float64 `json:"deviation"`
	Lower     *float64 `json:"lower_limit"`
	Upper     *float64 `json:"upper_limit"`
	Out       string   `json:"out"`
}

type jsonShift struct {
	Alpha   float64          `json:"alpha"`
	Power   float64          `json:"power"`
	Lambda  *float64         `json:"noncentrality"`
	Largest *float64         `json:"largest"`
	Groups  []jsonGroupShift `json:"groups"`
}

type jsonGroupShift struct {
	Name  string   `json:"name"`
	Shift *float64 `json:"shift"`
}

type jsonVerdict struct {
	Available bool             `json:"available"`
	Test      string           `json:"test,omitempty"`
	F         *float64         `json:"f"`
	P         *float64         `json:"p"`
	Differ    bool             `json:"differ"`
	Divergent []jsonDivergence `json:"divergent"`
	Spread    *jsonSpread      `json:"spread"`
	Text      string           `json:"text"`
}

type jsonDivergence struct {
	Name      string   `json:"name"`
	Direction string   `json:"direction"`
	Shift     *float64 `json:"shift"`
	Lwr       *float64 `json:"lwr"`
	Upr       *float64 `json:"upr"`
}

type jsonSpread struct {
	Name    string   `json:"name"`
	SDRatio *float64 `json:"sd_ratio"`
	P       *float64 `json:"p"`
}

// num returns a JSON number, or null for a value that is not finite.
func num(v float64) *float64 {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return nil
	}
	return &v
}

// numIf returns num(v) when ok, else null.
func numIf(v float64, ok bool) *float64 {
	if !ok {
		return nil
	}
	return num(v)
}

func direction(d int) string {
	switch {
	case d > 0:
		return "high"
	case d < 0:
		return "low"
	}
	return "within"
}

func toJSON(r stats.Report, info checkInfo) jsonReport {
	t := r.Table
	fOK := r.TableErr == nil
	dfOK := t.K >= 2
	msOK := dfOK && t.DFWithin >= 1
	j := jsonReport{
		Source:    info.Source,
		Unit:      info.Unit,
		Reference: r.Reference.Decimal().String(),
		Options:   jsonOptions{r.Options.Alpha, r.Options.Confidence, r.Options.Power},
		GrandMean: numIf(r.GrandMean, t.N > 0),
		Anova: jsonAnova{
			SSBetween: numIf(t.SSBetween, dfOK), SSWithin: numIf(t.SSWithin, dfOK), SSTotal: numIf(t.SSTotal, dfOK),
			DFBetween: numIf(t.DFBetween, dfOK), DFWithin: numIf(t.DFWithin, dfOK), DFTotal: numIf(t.DFTotal, dfOK),
			MSBetween: numIf(t.MSBetween, dfOK), MSWithin: numIf(t.MSWithin, msOK),
			F: numIf(t.F, fOK), P: numIf(t.P, fOK),
			R2:         numIf(t.R2, dfOK && t.SSTotal > 0),
			AdjR2:      numIf(t.AdjR2, msOK && t.SSTotal > 0),
			Omega2:     numIf(t.Omega2, msOK && t.SSTotal > 0),
			ResidualSD: numIf(t.ResidualSD, msOK),
		},
		Notes: r.Notes,
	}
	if j.Notes == nil {
		j.Notes = []string{}
	}
	if info.Data != nil {
		j.Rows, j.Inexact = info.Data.Rows, info.Data.Inexact
	}
	for i, g := range r.Groups {
		jg := jsonGroup{
			Name: g.Name, N: g.N,
			Mean: numIf(g.Mean, g.N > 0), SD: numIf(g.SD, g.N > 1),
			CILower: numIf(g.Lower, g.CIErr == nil), CIUpper: numIf(g.Upper, g.CIErr == nil),
			Min: numIf(g.Min, g.N > 0), Max: numIf(g.Max, g.N > 0),
		}
		if info.Data != nil && i < len(info.Data.Groups) {
			jg.ValuesKept, jg.Sampled = len(info.Data.Groups[i].Values), info.Data.Groups[i].Sampled
		}
		j.Groups = append(j.Groups, jg)
	}
	if w := r.Welch; w != nil {
		j.Welch = &jsonF{num(w.F), num(w.DF1), num(w.DF2), num(w.P)}
	}
	if b := r.Bartlett; b != nil {
		j.Bartlett = &jsonChi{num(b.Statistic), num(b.DF), num(b.P)}
	}
	if l := r.Levene; l != nil {
		j.Levene = &jsonF{num(l.F), num(l.DF1), num(l.DF2), num(l.P)}
	}
	if l := r.BrownForsythe; l != nil {
		j.BrownForsythe = &jsonF{num(l.F), num(l.DF1), num(l.DF2), num(l.P)}
	}
	if h := r.KruskalWallis; h != nil {
		j.KruskalWallis = &jsonKW{num(h.Statistic), num(h.DF), num(h.P)}
	}
	j.Pairs = []jsonPair{}
	for _, p := range r.Pairs {
		jp := jsonPair{A: r.Groups[p.A].Name, B: r.Groups[p.B].Name, Diff: num(p.Diff)}
		if tk := p.Tukey; tk != nil {
			jp.Tukey = &jsonTukey{num(tk.Lower), num(tk.Upper), num(tk.P)}
		}
		if gh := p.GamesHowell; gh != nil {
			jp.GamesHowell = &jsonGH{num(gh.DF), num(gh.P)}
		}
		j.Pairs = append(j.Pairs, jp)
	}
	if m := r.Means; m != nil {
		jm := &jsonMeans{Method: meansMethod, Alpha: m.Alpha, H: num(m.H)}
		for _, d := range m.Groups {
			jm.Groups = append(jm.Groups, jsonDeviation{
				Name: r.Groups[d.Group].Name, Deviation: num(d.Deviation),
				Lower: num(r.GrandMean - d.HalfWidth), Upper: num(r.GrandMean + d.HalfWidth),
				Out: direction(d.Direction),
			})
		}
		j.Means = jm
	}
	if s := r.Shift; s != nil {
		js := &jsonShift{Alpha: s.Alpha, Power: s.Power, Lambda: num(s.Lambda), Largest: num(s.Largest)}
		for i, v := range s.PerGroup {
			if r.Groups[i].N > 0 {
				js.Groups = append(js.Groups, jsonGroupShift{Name: r.Groups[i].Name, Shift: num(v)})
			}
		}
		j.Shift = js
	}
	v := r.Verdict
	j.Verdict = jsonVerdict{
		Available: v.Available, Test: v.Test, F: numIf(v.F, v.Available), P: numIf(v.P, v.Available),
		Differ: v.Differ, Divergent: []jsonDivergence{}, Text: verdictText(r, info.Unit),
	}
	for _, d := range v.Divergent {
		j.Verdict.Divergent = append(j.Verdict.Divergent, jsonDivergence{
			Name: d.Name, Direction: direction(d.Direction), Shift: num(d.Shift), Lwr: num(d.Lower), Upr: num(d.Upper),
		})
	}
	if s := v.Spread; s != nil {
		j.Verdict.Spread = &jsonSpread{Name: s.Name, SDRatio: num(s.Ratio), P: num(s.P)}
	}
	return j
}

// meansMethod names how the analysis-of-means limits are set.
const meansMethod = "Šidák-adjusted Student t limits around the grand mean (Ott 1967)"

func marshalReport(r stats.Report, info checkInfo) ([]byte, error) {
	b, err := json.MarshalIndent(toJSON(r, info), "", "  ")
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}
