package main

import (
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"flag"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"os"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/lockstep-project/lockstep/alert"
	"github.com/lockstep-project/lockstep/store"
)

// AlertsCommand is lockstep alerts: list and acknowledge the daemon's
// alerts through its HTTP API, or list those in a stopped daemon's store.
type AlertsCommand struct {
	Stdout, Stderr io.Writer
	// Getenv reads the environment; nil means os.Getenv.
	Getenv func(string) string
	// Client talks to the daemon; nil means a client with a 10 s timeout.
	Client *http.Client
}

// Usage returns the help text of lockstep alerts.
func (c *AlertsCommand) Usage() string {
	return `Usage:
  lockstep alerts list [--all] [--json] [--api URL | --config FILE | --store FILE]
  lockstep alerts ack ID --by NAME [--note TEXT] [--api URL | --config FILE] [--token TOKEN]

Lists the alerts of a running daemon, or acknowledges one, through its HTTP
API. An alert is in watch (seen, not yet confirmed), raised, acknowledged
or cleared; list shows the open ones (watch, raised, acknowledged), --all
adds the recently cleared. Acknowledging says that someone has seen a
raised alert; it stays acknowledged until its condition clears.

lockstep is advisory: an alert is a prompt to look at the groups it names,
not an instruction to stop a line or to reject product; follow the plant's
own quality procedures.

Options:
  --api URL        the daemon's API, e.g. http://127.0.0.1:8420 (default: the
                   [http] listen of --config, else http://127.0.0.1:8420)
  --config FILE    the daemon's configuration, for its address and token
  --token TOKEN    the API's bearer token (default LOCKSTEP_HTTP_TOKEN, then
                   [http] token of --config); acknowledging needs it when the
                   daemon has one, and every request does beyond loopback
  --store FILE     list: read a stopped daemon's store file instead, read-only
  --all            list: the recently cleared alerts too
  --json           list: {"alerts": [...]} as the API gives it
  --by NAME        ack: who acknowledges (required)
  --note TEXT      ack: what was seen or done

Exit status: 0 on success, 1 on failure (the daemon not reachable, an alert
not found or not raised), 2 on a usage mistake.
`
}

// Run runs list or ack.
func (c *AlertsCommand) Run(ctx context.Context, args []string) error {
	if len(args) == 0 {
		return fmt.Errorf("%w: give list or ack", errUsage)
	}
	switch args[0] {
	case "-h", "--help", "help":
		return errHelp
	case "list":
		return c.list(ctx, args[1:])
	case "ack":
		return c.ack(ctx, args[1:])
	}
	return fmt.Errorf("%w: no alerts command %q: give list or ack", errUsage, args[0])
}

// apiFlags are the flags that say how to reach the daemon.
type apiFlags struct {
	api, config, token *string
}

func apiFlagSet(name string) (*flag.FlagSet, apiFlags) {
	fs := newFlagSet("alerts " + name)
	return fs, apiFlags{api: fs.String("api", "", ""), config: fs.String("config", "", ""), token: fs.String("token", "", "")}
}

// base resolves the API's base URL and the token.
func (c *AlertsCommand) base(f apiFlags) (string, string, error) {
	getenv := c.Getenv
	if getenv == nil {
		getenv = os.Getenv
	}
	api, token := *f.api, *f.token
	if token == "" {
		token = getenv("LOCKSTEP_HTTP_TOKEN")
	}
	if *f.config != "" {
		cfg, err := loadSettings(*f.config)
		if err != nil {
			return "", "", err
		}
		if api == "" {
			api = "http://" + cfg.HTTP.Listen
		}
		if token == "" {
			token = cfg.HTTP.Token
		}
	}
	if api == "" {
		api = "http://" + defaultHTTPListen
	}
	if !strings.Contains(api, "://") {
		api = "http://" + api
	}
	u, err := url.Parse(api)
	if err != nil || (u.Scheme != "http" && u.Scheme != "https") || u.Host == "" {
		return "", "", fmt.Errorf("%w: --api %q: give the daemon's address such as http://127.0.0.1:8420", errUsage, api)
	}
	return strings.TrimSuffix(u.String(), "/"), token, nil
}

func (c *AlertsCommand) list(ctx context.Context, args []string) error {
	fs, f := apiFlagSet("list")
	all := fs.Bool("all", false, "")
	asJSON := fs.Bool("json", false, "")
	storePath := fs.String("store", "", "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) > 0 {
		return fmt.Errorf("%w: unexpected argument %q", errUsage, pos[0])
	}
	var alerts []alert.Alert
	if *storePath != "" {
		if *f.api != "" || *f.config != "" {
			return fmt.Errorf("%w: --store reads a file; --api and --config are for a running daemon", errUsage)
		}
		if alerts, err = storedAlerts(*storePath, *all); err != nil {
			return err
		}
	} else {
		base, token, err := c.base(f)
		if err != nil {
			return err
		}
		path := "/api/v1/alerts"
		if *all {
			path += "?state=all"
		}
		var body alertsJSON
		if err := c.call(ctx, http.MethodGet, base+path, token, nil, &body); err != nil {
			return err
		}
		alerts = body.Alerts
	}
	if *asJSON {
		if alerts == nil {
			alerts = []alert.Alert{}
		}
		b, err := json.MarshalIndent(alertsJSON{Alerts: alerts}, "", "  ")
		if err != nil {
			return fmt.Errorf("encode alerts: %w", err)
		}
		_, err = fmt.Fprintf(c.Stdout, "%s\n", b)
		return err
	}
	return writeAlertTable(c.Stdout, alerts)
}

// storedAlerts reads the alerts in a stopped daemon's store.
func storedAlerts(path string, all bool) ([]alert.Alert, error) {
	st, err := store.OpenReadOnly(path, store.Options{})
	if errors.Is(err, store.ErrInUse) {
		return nil, fmt.Errorf("%w\nA daemon holds the file: ask it instead, with lockstep alerts list --api URL", err)
	}
	if err != nil {
		return nil, err
	}
	defer st.Close()
	var out []alert.Alert
	err = st.Alerts(func(r store.AlertRecord) error {
		a, err := alert.DecodeRecord(r.Data)
		if err != nil {
			return fmt.Errorf("alert record %s: %w", r.ID, err)
		}
		if all || a.State.Open() {
			out = append(out, a)
		}
		return nil
	})
	if err != nil {
		return nil, fmt.Errorf("read alerts of %s: %w", path, err)
	}
	alert.SortAlerts(out)
	return out, nil
}

// writeAlertTable writes one line per alert.
func writeAlertTable(w io.Writer, alerts []alert.Alert) error {
	if len(alerts) == 0 {
		_, err := fmt.Fprintln(w, "no alerts")
		return err
	}
	tw := tabwriter.NewWriter(w, 0, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tSTATE\tCHARACTERISTIC\tKIND\tGROUPS\tFIGURES\tOPENED\tREASON")
	for _, a := range alerts {
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%s\n", a.ID, a.State, a.Characteristic, a.Kind,
			strings.Join(a.Groups, ","), figures(&a), a.Opened.UTC().Format(time.RFC3339), a.Reason)
	}
	return tw.Flush()
}

// figures says an alert's main figure in a few characters.
func figures(a *alert.Alert) string {
	switch a.Kind {
	case alert.KindMeansDiverge:
		return fmt.Sprintf("%+.4g %s [%.4g, %.4g] p=%.2g", a.Shift, a.Unit, a.Lower, a.Upper, a.P)
	case alert.KindSpreadDiverge:
		return fmt.Sprintf("SD ratio %.3g", a.Ratio)
	case alert.KindInputRejected:
		return fmt.Sprintf("rejects %.1f%%", 100*a.RejectRate)
	}
	return "-"
}

func (c *AlertsCommand) ack(ctx context.Context, args []string) error {
	fs, f := apiFlagSet("ack")
	by := fs.String("by", "", "")
	note := fs.String("note", "", "")
	pos, err := parseFlags(fs, args)
	if err != nil {
		return err
	}
	if len(pos) != 1 {
		return fmt.Errorf("%w: give exactly one alert ID (see lockstep alerts list), have %d", errUsage, len(pos))
	}
	if strings.TrimSpace(*by) == "" {
		return fmt.Errorf("%w: give --by NAME: who acknowledges the alert", errUsage)
	}
	base, token, err := c.base(f)
	if err != nil {
		return err
	}
	body, _ := json.Marshal(ackRequest{By: *by, Note: *note})
	var a alert.Alert
	if err := c.call(ctx, http.MethodPost, base+"/api/v1/alerts/"+url.PathEscape(pos[0])+"/ack", token, body, &a); err != nil {
		return err
	}
	_, err = fmt.Fprintf(c.Stdout, "acknowledged %s (%s %s, %s) by %s\n", a.ID, a.Characteristic, a.Kind, strings.Join(a.Groups, ","), a.AcknowledgedBy)
	return err
}

// call makes one API request and decodes the JSON answer into out; a non-2xx
// answer is an error with the API's message.
func (c *AlertsCommand) call(ctx context.Context, method, u, token string, body []byte, out any) error {
	client := c.Client
	if client == nil {
		client = &http.Client{Timeout: 10 * time.Second}
	}
	var rd io.Reader
	if body != nil {
		rd = bytes.NewReader(body)
	}
	req, err := http.NewRequestWithContext(ctx, method, u, rd)
	if err != nil {
		return fmt.Errorf("%w: %v", errUsage, err)
	}
	if body != nil {
		req.Header.Set("Content-Type", "application/json")
	}
	if token != "" {
		req.Header.Set("Authorization", "Bearer "+token)
	}
	resp, err := client.Do(req)
	if err != nil {
		return fmt.Errorf("reach the daemon at %s: %w\nIs lockstep run serving there? Give its address with --api URL (or --config FILE), or read a stopped daemon's file with lockstep alerts list --store FILE", u, err)
	}
	defer resp.Body.Close()
	b, err := io.ReadAll(io.LimitReader(resp.Body, 32<<20))
	if err != nil {
		return fmt.Errorf("read the daemon's answer from %s: %w", u, err)
	}
	if resp.StatusCode/100 != 2 {
		var e struct {
			Error string `json:"error"`
		}
		msg := strings.TrimSpace(string(b))
		if json.Unmarshal(b, &e) == nil && e.Error != "" {
			msg = e.Error
		}
		hint := ""
		switch resp.StatusCode {
		case http.StatusUnauthorized, http.StatusForbidden:
			hint = "\nGive the daemon's token with --token or LOCKSTEP_HTTP_TOKEN."
		case http.StatusNotFound:
			hint = "\nSee lockstep alerts list --all for the ids."
		}
		return fmt.Errorf("%s %s: %s: %s%s", method, u, resp.Status, msg, hint)
	}
	if err := json.Unmarshal(b, out); err != nil {
		return fmt.Errorf("decode the daemon's answer from %s: %w", u, err)
	}
	return nil
}
