package main

import (
	"fmt"
	"io"
	"os"
	"strings"
	"time"

	"github.com/rs/zerolog"
)

// newLogger returns the daemon's logger: JSON lines on w, or a readable
// console format when format is "console", or "auto" and w is a terminal.
// Components take a child with component(), so that every line says where
// it comes from under the constant key "component" (and a part of a
// component under "part", e.g. the daemon's alerts).
func newLogger(w io.Writer, level, format string) (zerolog.Logger, error) {
	lvl, err := zerolog.ParseLevel(strings.ToLower(level))
	if err != nil || level == "" {
		return zerolog.Nop(), fmt.Errorf("set log level %q: use trace, debug, info, warn or error", level)
	}
	switch format {
	case "console":
	case "json":
	case "auto", "":
		format = "json"
		if isTerminal(w) {
			format = "console"
		}
	default:
		return zerolog.Nop(), fmt.Errorf("set log format %q: use auto, json or console", format)
	}
	if format == "console" {
		w = zerolog.ConsoleWriter{Out: w, TimeFormat: time.DateTime, NoColor: !isTerminal(w)}
	}
	return zerolog.New(w).Level(lvl).With().Timestamp().Logger(), nil
}

// component returns the child logger of one part of the daemon.
func component(log zerolog.Logger, name string) zerolog.Logger {
	return log.With().Str("component", name).Logger()
}

// isTerminal reports whether w is a character device such as a terminal.
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}
