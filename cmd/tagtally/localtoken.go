package main

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"net/http"
	"os"
	"strings"

	"tagtally/server/access"
)

// localTokenPath is where `tagtally serve` keeps this machine's
// coordinator token while it runs: beside the data file, readable only by
// the user running the server (mode 0600), like the data file itself.
// The tagtally commands run on the same machine (backup, export, import,
// sync --server, access) send it to the running server.
func localTokenPath(data string) string { return data + ".token" }

// startLocalToken revokes the previous run's local token and writes a new
// one. The returned function removes the file and revokes the token.
func startLocalToken(acc *access.Service, data string) (stop func(), err error) {
	if _, err := acc.RevokeKind(access.KindLocal); err != nil {
		return nil, err
	}
	secret, tok, err := acc.Issue(access.NewToken{Kind: access.KindLocal, Label: "tagtally commands on this computer"})
	if err != nil {
		return nil, err
	}
	path := localTokenPath(data)
	if err := writeFileAtomically(path, 0o600, func(w io.Writer) error {
		_, err := io.WriteString(w, secret+"\n")
		return err
	}); err != nil {
		return nil, err
	}
	return func() {
		os.Remove(path)
		acc.Revoke(tok.ID)
	}, nil
}

// readLocalToken reads the running server's local token; "" when there is
// none (no server has this data file open).
func readLocalToken(data string) (string, error) {
	b, err := os.ReadFile(localTokenPath(data))
	if errors.Is(err, fs.ErrNotExist) {
		return "", nil
	}
	if err != nil {
		return "", fmt.Errorf("reading the server's local token: %w", err)
	}
	return strings.TrimSpace(string(b)), nil
}

// localRequest makes a request to the server on this machine that holds
// the data file, with the server's local coordinator token.
func localRequest(data, method, u string, body io.Reader) (*http.Request, error) {
	req, err := http.NewRequest(method, u, body)
	if err != nil {
		return nil, err
	}
	tok, err := readLocalToken(data)
	if err != nil {
		return nil, err
	}
	if tok != "" {
		req.Header.Set("Authorization", "Bearer "+tok)
	}
	return req, nil
}
