package api

import (
	"bufio"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/hex"
	"fmt"
	"io"
	"net/http"
	"strings"

	"eivfit/api/report"
	"eivfit/api/wire"

	"github.com/gin-gonic/gin"
)

// keyring holds the SHA-256 of every accepted API key.
type keyring struct{ hashes [][sha256.Size]byte }

// newKeyring takes keys as given ("KEY") or as hashes ("sha256:HEX").
func newKeyring(keys []string) (*keyring, error) {
	k := &keyring{}
	for i, key := range keys {
		key = strings.TrimSpace(key)
		if key == "" {
			continue
		}
		if h, ok := strings.CutPrefix(key, "sha256:"); ok {
			b, err := hex.DecodeString(h)
			if err != nil || len(b) != sha256.Size {
				return nil, fmt.Errorf("api key %d: sha256: needs 64 hex digits", i+1)
			}
			k.hashes = append(k.hashes, [sha256.Size]byte(b))
			continue
		}
		k.hashes = append(k.hashes, sha256.Sum256([]byte(key)))
	}
	return k, nil
}

// ReadAPIKeys reads one key per line ("KEY" or "sha256:HEX"); blank lines
// and lines starting with # are skipped.
func ReadAPIKeys(r io.Reader) ([]string, error) {
	var keys []string
	sc := bufio.NewScanner(r)
	for sc.Scan() {
		l := strings.TrimSpace(sc.Text())
		if l == "" || strings.HasPrefix(l, "#") {
			continue
		}
		keys = append(keys, l)
	}
	return keys, sc.Err()
}

// valid compares the presented key's hash with every stored hash in
// constant time (no early exit, so timing tells nothing about which or
// how much matched).
func (k *keyring) valid(token string) bool {
	h := sha256.Sum256([]byte(token))
	ok := 0
	for _, s := range k.hashes {
		ok |= subtle.ConstantTimeCompare(h[:], s[:])
	}
	return ok == 1
}

// presentedKey is the key in the Authorization header: "Bearer KEY", or
// "Basic" with the key as the password (the user name is ignored), which a
// browser sends for the page's form after asking for it.
func presentedKey(r *http.Request) string {
	h := r.Header.Get("Authorization")
	if token, ok := strings.CutPrefix(h, "Bearer "); ok {
		return strings.TrimSpace(token)
	}
	if _, pass, ok := r.BasicAuth(); ok {
		return pass
	}
	return ""
}

// authorize requires "Authorization: Bearer KEY" when keys are configured.
// It runs before the handler, so no byte of an unauthorized body is read.
func (s *Server) authorize(c *gin.Context) {
	if len(s.keys.hashes) == 0 || s.keys.valid(presentedKey(c.Request)) {
		return
	}
	c.Header("Connection", "close") // the body is left unread
	s.problem(c, wire.NewProblem(wire.KindUnauthorized, "send a valid API key as \"Authorization: Bearer KEY\""))
}

// authorizeForm guards POST /report as authorize guards /v1/*, before the
// body is read: a browser without the key is asked for it (HTTP Basic, the
// key as the password) and gets the form page with the reason.
func (s *Server) authorizeForm(c *gin.Context) {
	if len(s.keys.hashes) == 0 || s.keys.valid(presentedKey(c.Request)) {
		return
	}
	c.Header("WWW-Authenticate", `Basic realm="eivfit", charset="UTF-8"`)
	c.Header("Connection", "close")
	s.writeHTML(c, http.StatusUnauthorized, func(w io.Writer) error {
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, Error: "A valid API key is required: enter it as the password when the browser asks (any user name)."})
	})
	c.Abort()
}

func sha256Sum(s string) [sha256.Size]byte { return sha256.Sum256([]byte(s)) }
