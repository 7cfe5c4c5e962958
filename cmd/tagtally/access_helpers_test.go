package main

import (
	"bytes"
	"encoding/json"
	"net/http"
	"net/url"
	"os"
	stdsync "sync"
	"testing"
)

// localTokens maps a test server's host:port to the local coordinator
// token its `tagtally serve` wrote beside the data file: the tests talk
// to the servers they start the way the tagtally commands on the same
// machine do.
var localTokens stdsync.Map

// tokenTransport adds the local token of the server addressed to every
// request that carries no Authorization of its own.
type tokenTransport struct{ base http.RoundTripper }

func (tt tokenTransport) RoundTrip(r *http.Request) (*http.Response, error) {
	if tok, ok := localTokens.Load(r.URL.Host); ok && r.Header.Get("Authorization") == "" {
		r = r.Clone(r.Context())
		r.Header.Set("Authorization", "Bearer "+tok.(string))
	}
	return tt.base.RoundTrip(r)
}

func TestMain(m *testing.M) {
	http.DefaultTransport = tokenTransport{http.DefaultTransport}
	os.Exit(m.Run())
}

// rememberToken reads the local token of the server at base serving data.
func rememberToken(t testing.TB, base, data string) {
	t.Helper()
	tok, err := readLocalToken(data)
	if err != nil || tok == "" {
		t.Fatalf("no local token beside %s: %q %v", data, tok, err)
	}
	u, err := url.Parse(base)
	if err != nil {
		t.Fatal(err)
	}
	localTokens.Store(u.Host, tok)
}

// peerToken asks the server at base (as its coordinator) for a peer token
// for the test study, as the coordinator does on the Access page.
func peerToken(t testing.TB, base, study string) string {
	t.Helper()
	body, _ := json.Marshal(map[string]any{"kind": "peer", "label": "test peer", "studies": []string{study}})
	resp, err := http.Post(base+"/api/v1/access/tokens", "application/json", bytes.NewReader(body))
	if err != nil {
		t.Fatal(err)
	}
	defer resp.Body.Close()
	var ans struct{ Token string }
	if err := json.NewDecoder(resp.Body).Decode(&ans); err != nil || resp.StatusCode != http.StatusCreated || ans.Token == "" {
		t.Fatalf("peer token from %s: %s %v", base, resp.Status, err)
	}
	return ans.Token
}
