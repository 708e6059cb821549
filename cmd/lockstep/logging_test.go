package main

import (
	"bytes"
	"encoding/json"
	"strings"
	"testing"
)

func TestLogger(t *testing.T) {
	var buf bytes.Buffer
	log, err := newLogger(&buf, "info", "auto") // a buffer is no terminal: JSON lines
	if err != nil {
		t.Fatal(err)
	}
	dlog := component(log, "daemon")
	dlog.Info().Uint64("cursor", 7).Msg("state restored")
	dlog.Debug().Msg("not shown at info")
	var line map[string]any
	if err := json.Unmarshal(buf.Bytes(), &line); err != nil {
		t.Fatalf("not one JSON line: %q", buf.String())
	}
	if line["component"] != "daemon" || line["level"] != "info" || line["message"] != "state restored" || line["cursor"] != 7.0 || line["time"] == nil {
		t.Errorf("line %v", line)
	}

	buf.Reset()
	log, err = newLogger(&buf, "debug", "console")
	if err != nil {
		t.Fatal(err)
	}
	hlog := component(log, "http")
	hlog.Debug().Str("listen", "127.0.0.1:8420").Msg("serving")
	if out := buf.String(); strings.HasPrefix(out, "{") || !strings.Contains(out, "serving") || !strings.Contains(out, "component=http") {
		t.Errorf("console line %q", out)
	}

	for _, tc := range [][2]string{{"loud", "auto"}, {"", "json"}, {"info", "xml"}} {
		if _, err := newLogger(&buf, tc[0], tc[1]); err == nil {
			t.Errorf("newLogger(%q, %q): no error", tc[0], tc[1])
		}
	}
}
