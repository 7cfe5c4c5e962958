package main

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"tagtally/server/access"
)

const accessHelp = `
Manages who may use this server, on the computer that holds the data file.

  tagtally access link
      a new one-time coordinator link (the server must be running; open
      the link on this computer). Older unused links stop working.
  tagtally access token --kind peer --study ID [--study ID2] --label NAME
      a token another tagtally server uses to sync these studies
      (tagtally sync --token there). It is printed once; keep it safe.
  tagtally access token --kind coordinator --label NAME
      a coordinator token for scripts (Authorization: Bearer TOKEN).
  tagtally access list
      every phone, server, browser session and script token, with when it
      was last used and whether it is revoked.
  tagtally access revoke ID
      cut off a token now (a lost phone): its next request is refused.
      The records it already sent stay.

Phones do not need this command: the coordinator makes a join code on the
Access page of the coordinator's pages and the phone scans it.

It works on the data file directly when the server is stopped, and
through the running server (with the token serve keeps beside the data
file) when it runs.`

// studyList is a repeatable --study flag.
type studyList []string

func (s *studyList) String() string     { return strings.Join(*s, ",") }
func (s *studyList) Set(v string) error { *s = append(*s, v); return nil }

func runAccess(args []string, stdout io.Writer) error {
	cfg, err := defaultConfig()
	if err != nil {
		return err
	}
	fs := newFlagSet("access", "tagtally access link | token [options] | list | revoke ID", accessHelp)
	fs.SetOutput(stdout)
	cfg.addDataFlag(fs)
	cfg.addPortFlag(fs, "the port of the running server, if it is running")
	kind := fs.String("kind", "", "for token: peer (another tagtally server) or coordinator (a script)")
	label := fs.String("label", "", "for token: a name saying who or what uses it, e.g. \"program office\"")
	var studies studyList
	fs.Var(&studies, "study", "for a peer token: a study it may sync (repeat for more)")
	if len(args) == 0 || strings.HasPrefix(args[0], "-") {
		if err := parseArgs(fs, args, 0); err != nil {
			return err
		}
		return fmt.Errorf("%w: say what to do: link, token, list or revoke ID (see tagtally access --help)", errUsage)
	}
	action, rest := args[0], args[1:]
	positional := 0
	if action == "revoke" {
		positional = 1
	}
	// The revoke ID may come before or after the options.
	var id string
	if action == "revoke" && len(rest) > 0 && !strings.HasPrefix(rest[0], "-") {
		id, rest, positional = rest[0], rest[1:], 0
	}
	if err := parseArgs(fs, rest, positional); err != nil {
		return err
	}
	if action == "revoke" && id == "" {
		id = fs.Arg(0)
	}
	if err := cfg.validate(); err != nil {
		return err
	}
	a := accessDesk{data: cfg.Data, port: cfg.Port}
	switch action {
	case "link":
		return a.link(stdout)
	case "token":
		if *kind != string(access.KindPeer) && *kind != string(access.KindCoordinator) {
			return fmt.Errorf("%w: --kind is peer or coordinator (phones join with a join code instead)", errUsage)
		}
		if *kind == string(access.KindPeer) && len(studies) == 0 {
			return fmt.Errorf("%w: a peer token needs at least one --study", errUsage)
		}
		return a.token(stdout, access.NewToken{Kind: access.Kind(*kind), Label: *label, Studies: studies, CreatedBy: "tagtally access"})
	case "list":
		return a.list(stdout)
	case "revoke":
		if id == "" {
			return fmt.Errorf("%w: give the ID of the token to revoke (tagtally access list shows them)", errUsage)
		}
		return a.revoke(stdout, id)
	}
	return fmt.Errorf("%w: unknown action %q: link, token, list or revoke", errUsage, action)
}

// accessDesk does an access action on the data file, or through the
// server running with it.
type accessDesk struct {
	data string
	port int
}

// direct runs fn on the data file; errInUse when a server holds it.
func (a accessDesk) direct(fn func(*access.Service) error) error {
	store, err := openStore(a.data)
	if err != nil {
		return err
	}
	err = fn(access.New(store))
	if cerr := store.Close(); err == nil {
		err = cerr
	}
	return err
}

// call makes a request to the running server as its local coordinator.
func (a accessDesk) call(method, path string, body, out any) error {
	base := "http://127.0.0.1:" + strconv.Itoa(a.port)
	if err := isTagtally(base); err != nil {
		return fmt.Errorf("%w, and no tagtally server answered at %s (%v); pass the server's --port", errInUse, base, err)
	}
	var rd io.Reader
	if body != nil {
		b, _ := json.Marshal(body)
		rd = bytes.NewReader(b)
	}
	req, err := localRequest(a.data, method, base+path, rd)
	if err != nil {
		return err
	}
	if body != nil {
		req.Header.Set("Content-Type", "application/json")
	}
	resp, err := (&http.Client{Timeout: time.Minute}).Do(req)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	raw, _ := io.ReadAll(io.LimitReader(resp.Body, 16<<20))
	if resp.StatusCode/100 != 2 {
		var e struct{ Error string }
		json.Unmarshal(raw, &e)
		return fmt.Errorf("the server answered %s: %s", resp.Status, e.Error)
	}
	if out != nil {
		return json.Unmarshal(raw, out)
	}
	return nil
}

func (a accessDesk) link(w io.Writer) error {
	var ans struct {
		URL     string    `json:"url"`
		Expires time.Time `json:"expires"`
	}
	if err := a.call(http.MethodPost, "/api/v1/access/claim-link", struct{}{}, &ans); err != nil {
		if errors.Is(err, errInUse) {
			return fmt.Errorf("%w; start tagtally serve: it prints a new coordinator link each time it starts", err)
		}
		return err
	}
	fmt.Fprintf(w, "Open this link once, on this computer, before %s:\n  %s\n", ans.Expires.Local().Format("2006-01-02 15:04"), ans.URL)
	return nil
}

func (a accessDesk) token(w io.Writer, n access.NewToken) error {
	var secret string
	var tok *access.Token
	err := a.direct(func(s *access.Service) (err error) {
		secret, tok, err = s.Issue(n)
		return err
	})
	if errors.Is(err, errInUse) {
		var ans struct {
			Secret string `json:"token"`
			access.Token
		}
		if err = a.call(http.MethodPost, "/api/v1/access/tokens", map[string]any{"kind": n.Kind, "label": n.Label, "studies": n.Studies}, &ans); err == nil {
			secret, tok = ans.Secret, &ans.Token
		}
	}
	if err != nil {
		return err
	}
	scope := "every study"
	if len(tok.Studies) > 0 {
		scope = "studies " + strings.Join(tok.Studies, ", ")
	}
	fmt.Fprintf(w, "New %s token %s (%s), for %s. It is shown only now:\n%s\n", tok.Kind, tok.ID, tok.Label, scope, secret)
	return nil
}

func (a accessDesk) list(w io.Writer) error {
	var list []access.Token
	err := a.direct(func(s *access.Service) (err error) {
		list, err = s.Tokens()
		return err
	})
	if errors.Is(err, errInUse) {
		var ans struct{ Tokens []access.Token }
		err = a.call(http.MethodGet, "/api/v1/access/tokens", nil, &ans)
		list = ans.Tokens
	}
	if err != nil {
		return err
	}
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "ID\tKIND\tROLE\tSTUDIES\tLABEL\tLAST USED\tREVOKED")
	for _, t := range list {
		studies := "all"
		if len(t.Studies) > 0 {
			studies = strings.Join(t.Studies, ",")
		}
		revoked := "-"
		if t.Revoked != nil {
			revoked = t.Revoked.Local().Format("2006-01-02 15:04")
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\n", t.ID, t.Kind, t.Role, studies, t.Label, t.LastUsed.Local().Format("2006-01-02 15:04"), revoked)
	}
	return tw.Flush()
}

func (a accessDesk) revoke(w io.Writer, id string) error {
	var tok *access.Token
	err := a.direct(func(s *access.Service) (err error) {
		tok, err = s.Revoke(id)
		return err
	})
	if errors.Is(err, errInUse) {
		tok = new(access.Token)
		err = a.call(http.MethodPost, "/api/v1/access/tokens/"+url.PathEscape(id)+"/revoke", struct{}{}, tok)
	}
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "Revoked %s (%s %s): it is refused from its next request; its records stay.\n", tok.ID, tok.Kind, tok.Label)
	return nil
}
