package ingest

import (
	"errors"
	"fmt"
	"strings"
)

// DefaultSubjectTemplate is the subject template used when none is
// configured: the second token names the characteristic and the third the
// group, as in meas.fill-weight.L3.
const DefaultSubjectTemplate = "meas.<characteristic>.<group>"

// MaxLabels is the most label tokens (named tokens other than
// <characteristic> and <group>) that a subject template may have.
const MaxLabels = 8

// ErrTemplate is wrapped by the errors of ParseSubjectTemplate.
var ErrTemplate = errors.New("invalid subject template")

// SubjectTemplate says which tokens of a NATS subject name the
// characteristic, the group and other labels. It is a dot-separated list of
// tokens, each one of:
//
//   - <characteristic>: required, once; the token names the characteristic;
//   - <group>: at most once; the token names the group. Without it, each
//     measurement must name its group in the payload's "group" field;
//   - <name> for another name (lower-case letters, digits, '_' and '-',
//     starting with a letter, at most 32 bytes), such as <site> or <cell>:
//     the token becomes a label of that name, up to MaxLabels of them;
//   - *: any one token, ignored;
//   - >: one or more final tokens, ignored; only as the last token;
//   - anything else: a literal token that the subject must have there
//     (no white space, and none of . * > < inside).
//
// A SubjectTemplate is never modified after ParseSubjectTemplate, so it may
// be used from many goroutines at once.
type SubjectTemplate struct {
	text   string
	filter string
	tokens []templateToken
	group  bool // has a <group> token
	labels []string
}

// Kinds of template tokens.
const (
	tokenLiteral = iota
	tokenAny
	tokenTail
	tokenCharacteristic
	tokenGroup
	tokenLabel
)

type templateToken struct {
	kind  uint8
	label uint8  // index into labels, for tokenLabel
	text  string // the literal, for tokenLiteral
}

// Label is a named subject token other than the characteristic and the
// group, such as site=plant2.
type Label struct {
	Name  string // the name in the template, e.g. "site"
	Value []byte // the token of the subject: a view into the subject
}

// SubjectMatch is what a subject says according to a template. Its byte
// slices are views into the matched subject.
type SubjectMatch struct {
	// Characteristic is the token at <characteristic>.
	Characteristic []byte
	// Group is the token at <group>, or nil when the template has none.
	Group  []byte
	labels [MaxLabels]Label
	n      uint8
}

// Labels returns the labels in template order, as a view into m.
func (m *SubjectMatch) Labels() []Label { return m.labels[:m.n] }

// Label returns the value of the label name and whether the template has
// such a label.
func (m *SubjectMatch) Label(name string) ([]byte, bool) {
	for _, l := range m.labels[:m.n] {
		if l.Name == name {
			return l.Value, true
		}
	}
	return nil, false
}

// ParseSubjectTemplate parses a subject template (see SubjectTemplate).
// Errors wrap ErrTemplate and name the token at fault.
func ParseSubjectTemplate(s string) (*SubjectTemplate, error) {
	fail := func(format string, args ...any) error {
		return fmt.Errorf("parse subject template %q: %s: %w", s, fmt.Sprintf(format, args...), ErrTemplate)
	}
	if s == "" {
		return nil, fail("empty; use e.g. %q", DefaultSubjectTemplate)
	}
	t := &SubjectTemplate{text: s}
	parts := strings.Split(s, ".")
	filter := make([]string, len(parts))
	seen := map[string]bool{}
	hasChar := false
	for i, tok := range parts {
		pos := fmt.Sprintf("token %d", i+1)
		tt := templateToken{}
		switch {
		case tok == "":
			return nil, fail("%s is empty; separate tokens with single dots, without a dot at either end", pos)
		case tok == "*":
			tt.kind = tokenAny
			filter[i] = "*"
		case tok == ">":
			if i != len(parts)-1 {
				return nil, fail("%s: '>' matches the rest of a subject and may only be the last token; use '*' for a single token", pos)
			}
			tt.kind = tokenTail
			filter[i] = ">"
		case strings.HasPrefix(tok, "<") || strings.HasSuffix(tok, ">"):
			name, ok := strings.CutPrefix(tok, "<")
			name, ok2 := strings.CutSuffix(name, ">")
			if !ok || !ok2 || !validLabelName(name) {
				return nil, fail("%s %q: a named token is <name> with a name of lower-case letters, digits, '_' and '-', starting with a letter, at most 32 bytes", pos, tok)
			}
			if seen[name] {
				return nil, fail("%s: <%s> appears more than once; name each token once", pos, name)
			}
			seen[name] = true
			filter[i] = "*"
			switch name {
			case "characteristic":
				tt.kind = tokenCharacteristic
				hasChar = true
			case "group":
				tt.kind = tokenGroup
				t.group = true
			default:
				if len(t.labels) == MaxLabels {
					return nil, fail("%s: more than %d labels; drop some, or match their tokens with '*'", pos, MaxLabels)
				}
				tt.kind = tokenLabel
				tt.label = uint8(len(t.labels))
				t.labels = append(t.labels, name)
			}
		default:
			if j := strings.IndexFunc(tok, func(r rune) bool {
				return r <= ' ' || r == 0x7f || r == '*' || r == '>' || r == '<'
			}); j >= 0 {
				return nil, fail("%s %q: a literal token may not contain %q; use <name>, '*' or '>' as whole tokens", pos, tok, tok[j])
			}
			tt.text = tok
			filter[i] = tok
		}
		t.tokens = append(t.tokens, tt)
	}
	if !hasChar {
		return nil, fail("no <characteristic> token; mark the token that names the characteristic, e.g. %q", DefaultSubjectTemplate)
	}
	t.filter = strings.Join(filter, ".")
	return t, nil
}

// validLabelName reports whether name may stand between < and >.
func validLabelName(name string) bool {
	if name == "" || len(name) > 32 || name[0] < 'a' || name[0] > 'z' {
		return false
	}
	for _, c := range []byte(name) {
		if !('a' <= c && c <= 'z' || '0' <= c && c <= '9' || c == '_' || c == '-') {
			return false
		}
	}
	return true
}

// String returns the template as it was parsed.
func (t *SubjectTemplate) String() string { return t.text }

// Filter returns the NATS subject to subscribe to: the template with every
// named token replaced by '*', e.g. "meas.*.*" for the default template.
func (t *SubjectTemplate) Filter() string { return t.filter }

// HasGroup reports whether the template has a <group> token. Without one,
// every measurement must name its group in the payload.
func (t *SubjectTemplate) HasGroup() bool { return t.group }

// LabelNames returns the names of the label tokens in template order.
func (t *SubjectTemplate) LabelNames() []string {
	return append([]string(nil), t.labels...)
}

// Match matches subject against the template. ok is false when the number
// of tokens differs (with '>', when no token is left for it), a literal
// token differs, or the subject has an empty token. Match does not
// allocate: the match holds views into subject.
func (t *SubjectTemplate) Match(subject []byte) (m SubjectMatch, ok bool) {
	if !t.match(subject, &m) {
		return SubjectMatch{}, false
	}
	return m, true
}

// match is Match into *m, which it need not clear first: a SubjectMatch is
// 376 bytes, and Validator.Check matches every message. On false, *m is
// garbage. Labels of m beyond the template's are left as they were; they
// are not visible through Labels or Label.
func (t *SubjectTemplate) match(subject []byte, m *SubjectMatch) bool {
	m.Characteristic, m.Group = nil, nil
	rest := subject
	last := len(t.tokens) - 1
	for i, tt := range t.tokens {
		if tt.kind == tokenTail {
			if !validTokens(rest) {
				return false
			}
			break
		}
		tok, after, more := cutDot(rest)
		if len(tok) == 0 || more != (i < last) {
			// An empty token, or a subject longer or shorter than the
			// template.
			return false
		}
		rest = after
		switch tt.kind {
		case tokenLiteral:
			if string(tok) != tt.text {
				return false
			}
		case tokenCharacteristic:
			m.Characteristic = tok
		case tokenGroup:
			m.Group = tok
		case tokenLabel:
			m.labels[tt.label] = Label{Name: t.labels[tt.label], Value: tok}
		}
	}
	m.n = uint8(len(t.labels))
	return true
}

// validTokens reports whether b is one or more non-empty dot-separated
// tokens.
func validTokens(b []byte) bool {
	if len(b) == 0 || b[0] == '.' || b[len(b)-1] == '.' {
		return false
	}
	for i := 1; i < len(b); i++ {
		if b[i] == '.' && b[i-1] == '.' {
			return false
		}
	}
	return true
}

// cutDot splits b at its first '.': the token before it, the rest after it,
// and whether there was a dot.
func cutDot(b []byte) (tok, rest []byte, more bool) {
	for i, c := range b {
		if c == '.' {
			return b[:i], b[i+1:], true
		}
	}
	return b, nil, false
}
