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

// Role is what an API key may do; each role includes the ones before it.
type Role int

// The roles, named in the keys file as read, analyse and sign.
const (
	RoleRead    Role = iota + 1 // GET: studies, their inputs, reports and history
	RoleAnalyse                 // also compute (POST), save and revise studies
	RoleSign                    // also sign revisions
)

var roleNames = map[string]Role{"read": RoleRead, "analyse": RoleAnalyse, "sign": RoleSign}

// apiKey is one accepted key: its SHA-256, its holder's name and role.
type apiKey struct {
	hash [sha256.Size]byte
	name string
	role Role
}

// keyring holds every accepted API key.
type keyring struct{ keys []apiKey }

// newKeyring reads each entry as "NAME ROLE KEY" (KEY as given, or
// "sha256:HEX"), or in the older one-field form "KEY": such a key is named
// "key-" and the first 8 hex digits of its SHA-256, with role analyse (it
// computes and saves as before, and signs nothing: a signature needs a
// person's name).
func newKeyring(entries []string) (*keyring, error) {
	k := &keyring{}
	names := map[string]bool{}
	for i, e := range entries {
		f := strings.Fields(e)
		if len(f) == 0 {
			continue
		}
		var key apiKey
		var secret string
		switch len(f) {
		case 1:
			secret, key.role = f[0], RoleAnalyse
		case 3:
			r, ok := roleNames[f[1]]
			if !ok {
				return nil, fmt.Errorf("api key %d: role %q: use read, analyse or sign", i+1, f[1])
			}
			key.name, key.role, secret = f[0], r, f[2]
		default:
			return nil, fmt.Errorf("api key %d: write NAME ROLE KEY (or the key alone)", i+1)
		}
		if h, ok := strings.CutPrefix(secret, "sha256:"); ok {
			b, err := hex.DecodeString(h)
			if err != nil || len(b) != sha256.Size {
				return nil, fmt.Errorf("api key %d: sha256: needs 64 hex digits", i+1)
			}
			key.hash = [sha256.Size]byte(b)
		} else {
			key.hash = sha256.Sum256([]byte(secret))
		}
		if key.name == "" {
			key.name = "key-" + hex.EncodeToString(key.hash[:4])
		}
		if names[key.name] {
			return nil, fmt.Errorf("api key %d: the name %q is taken by another key", i+1, key.name)
		}
		names[key.name] = true
		k.keys = append(k.keys, key)
	}
	return k, nil
}

// ReadAPIKeys reads one key per line: "NAME ROLE KEY" (role read, analyse
// or sign; KEY or sha256:HEX), or the key alone; blank lines and lines
// starting with # are skipped.
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

// find compares the presented key's hash with every stored hash in
// constant time (no early exit, so timing tells nothing about which or
// how much matched) and returns the matching key.
func (k *keyring) find(token string) *apiKey {
	h := sha256.Sum256([]byte(token))
	found := -1
	for i := range k.keys {
		if subtle.ConstantTimeCompare(h[:], k.keys[i].hash[:]) == 1 {
			found = i
		}
	}
	if found < 0 {
		return nil
	}
	return &k.keys[found]
}

// keyContext is where authorize leaves the request's key.
const keyContext = "eivfit.key"

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

// authorize requires "Authorization: Bearer KEY" when keys are configured,
// and a role that allows the request: read for GET and HEAD, analyse for
// everything else (signing asks for more: see needSigner). It runs before
// the handler, so no byte of an unauthorized body is read.
func (s *Server) authorize(c *gin.Context) {
	if len(s.keys.keys) == 0 {
		return
	}
	key := s.keys.find(presentedKey(c.Request))
	if key == nil {
		c.Header("Connection", "close") // the body is left unread
		s.problem(c, wire.NewProblem(wire.KindUnauthorized, "send a valid API key as \"Authorization: Bearer KEY\""))
		return
	}
	c.Set(keyContext, key)
	if m := c.Request.Method; m != http.MethodGet && m != http.MethodHead && key.role < RoleAnalyse {
		c.Header("Connection", "close")
		s.problem(c, wire.NewProblem(wire.KindForbidden, fmt.Sprintf("the key %q has role read: it may read, not compute or save", key.name)))
	}
}

// authorizeForm guards POST /report as authorize guards /v1/*, before the
// body is read: a browser without a key that may analyse is asked for it
// (HTTP Basic, the key as the password) and gets the form page with the
// reason.
func (s *Server) authorizeForm(c *gin.Context) {
	if len(s.keys.keys) == 0 {
		return
	}
	key := s.keys.find(presentedKey(c.Request))
	if key != nil && key.role >= RoleAnalyse {
		c.Set(keyContext, key)
		return
	}
	reason := "A valid API key is required: enter it as the password when the browser asks (any user name)."
	if key != nil {
		reason = fmt.Sprintf("The key %q has role read: it may read, not compute. Enter a key that may analyse.", key.name)
	}
	status := http.StatusForbidden
	if key == nil {
		status = http.StatusUnauthorized
		c.Header("WWW-Authenticate", `Basic realm="eivfit", charset="UTF-8"`)
	}
	c.Header("Connection", "close")
	s.writeHTML(c, status, func(w io.Writer) error {
		return report.WriteForm(w, &report.Form{Version: s.cfg.Version, Error: reason})
	})
	c.Abort()
}

// needSigner guards signing: keys must be configured (a signature names
// a person) and the key's role must be sign.
func (s *Server) needSigner(c *gin.Context) {
	key := s.who(c)
	switch {
	case len(s.keys.keys) == 0:
		s.problem(c, wire.NewProblem(wire.KindForbidden, "signing needs API keys: a signature names its signer, and this server has no keys (see --api-keys-file)"))
	case key == nil:
		s.problem(c, wire.NewProblem(wire.KindUnauthorized, "send a valid API key as \"Authorization: Bearer KEY\""))
	case key.role < RoleSign:
		s.problem(c, wire.NewProblem(wire.KindForbidden, fmt.Sprintf("the key %q may not sign: its role is not sign", key.name)))
	}
}

// who returns the request's key (nil without keys).
func (s *Server) who(c *gin.Context) *apiKey {
	v, _ := c.Get(keyContext)
	k, _ := v.(*apiKey)
	return k
}

// whoName is the request's key name ("" without keys).
func (s *Server) whoName(c *gin.Context) string {
	if k := s.who(c); k != nil {
		return k.name
	}
	return ""
}

func sha256Sum(s string) [sha256.Size]byte { return sha256.Sum256([]byte(s)) }
