package api

import (
	"eivfit/api/wire"

	"bufio"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/hex"
	"fmt"
	"io"
	"strings"

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

// authorize requires "Authorization: Bearer KEY" when keys are configured.
func (s *Server) authorize(c *gin.Context) {
	if len(s.keys.hashes) == 0 {
		return
	}
	token, ok := strings.CutPrefix(c.GetHeader("Authorization"), "Bearer ")
	if !ok || !s.keys.valid(strings.TrimSpace(token)) {
		s.problem(c, wire.NewProblem(wire.KindUnauthorized, "send a valid API key as \"Authorization: Bearer KEY\""))
	}
}

func sha256Sum(s string) [sha256.Size]byte { return sha256.Sum256([]byte(s)) }
