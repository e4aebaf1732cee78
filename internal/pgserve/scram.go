package pgserve

import (
	"bufio"
	"bytes"
	"crypto/hmac"
	"crypto/pbkdf2"
	"crypto/rand"
	"crypto/sha256"
	"crypto/subtle"
	"encoding/base64"
	"errors"
	"fmt"
	"os"
	"strings"
)

// scramIterations is the PBKDF2 iteration count of the stored keys: 4096 is RFC 7677's
// minimum for SCRAM-SHA-256 and PostgreSQL's default (common practice).
const scramIterations = 4096

// verifier is what the server keeps of a password (RFC 5802, section 3): the salt and
// the two keys derived from the salted password, never the password itself.
type verifier struct {
	salt      []byte
	storedKey []byte // H(HMAC(SaltedPassword, "Client Key"))
	serverKey []byte // HMAC(SaltedPassword, "Server Key")
}

func newVerifier(password string) (*verifier, error) {
	salt := make([]byte, 16)
	rand.Read(salt)
	salted, err := pbkdf2.Key(sha256.New, password, salt, scramIterations, sha256.Size)
	if err != nil {
		return nil, err
	}
	clientKey := hmacSHA256(salted, "Client Key")
	stored := sha256.Sum256(clientKey)
	return &verifier{salt: salt, storedKey: stored[:], serverKey: hmacSHA256(salted, "Server Key")}, nil
}

func hmacSHA256(key []byte, msg string) []byte {
	m := hmac.New(sha256.New, key)
	m.Write([]byte(msg))
	return m.Sum(nil)
}

// Users holds the verifiers of the users allowed to connect.
type Users struct {
	byName map[string]*verifier
	decoy  *verifier // answers for unknown users, so that a client cannot tell them apart
}

// NewUsers derives the verifiers of name → password pairs.
func NewUsers(passwords map[string]string) (*Users, error) {
	if len(passwords) == 0 {
		return nil, errors.New("pgserve: no users")
	}
	u := &Users{byName: map[string]*verifier{}}
	for name, pw := range passwords {
		if name == "" || pw == "" {
			return nil, errors.New("pgserve: a user needs a name and a password")
		}
		v, err := newVerifier(pw)
		if err != nil {
			return nil, fmt.Errorf("pgserve: user %q: %w", name, err)
		}
		u.byName[name] = v
	}
	decoy := make([]byte, 32)
	rand.Read(decoy)
	v, err := newVerifier(string(decoy))
	if err != nil {
		return nil, err
	}
	u.decoy = v
	return u, nil
}

// ReadPasswordFile reads NAME:PASSWORD lines ('#' starts a comment line; blank lines
// are skipped). The file must not be readable by group or others.
func ReadPasswordFile(path string) (map[string]string, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("password file: %w", err)
	}
	if st.Mode().Perm()&0o077 != 0 {
		return nil, fmt.Errorf("password file %q can be read by other users (mode %v): restrict it with chmod 600", path, st.Mode().Perm())
	}
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("password file: %w", err)
	}
	out := map[string]string{}
	sc := bufio.NewScanner(bytes.NewReader(b))
	for line := 1; sc.Scan(); line++ {
		text := strings.TrimRight(sc.Text(), "\r")
		if strings.TrimSpace(text) == "" || strings.HasPrefix(strings.TrimSpace(text), "#") {
			continue
		}
		name, pw, ok := strings.Cut(text, ":")
		name = strings.TrimSpace(name)
		if !ok || name == "" || pw == "" {
			return nil, fmt.Errorf("password file %q line %d: want NAME:PASSWORD", path, line)
		}
		if _, dup := out[name]; dup {
			return nil, fmt.Errorf("password file %q line %d: user %q given twice", path, line, name)
		}
		out[name] = pw
	}
	if len(out) == 0 {
		return nil, fmt.Errorf("password file %q has no NAME:PASSWORD line", path)
	}
	return out, nil
}

// scramExchange is the server side of one SCRAM-SHA-256 exchange (RFC 5802 with
// RFC 7677's hash), without channel binding.
type scramExchange struct {
	v               *verifier
	known           bool
	clientFirstBare string
	serverFirst     string
	nonce           string
	gs2Header       string
}

var errSCRAM = errors.New("malformed SCRAM message")

// first reads the client-first-message and returns the server-first-message.
func (x *scramExchange) first(msg string) (string, error) {
	// gs2-header: "n,," (no channel binding) or "y,," (client could but thinks we
	// cannot); "p=..." asks for channel binding, which we do not offer.
	switch {
	case strings.HasPrefix(msg, "n,"), strings.HasPrefix(msg, "y,"):
	default:
		return "", fmt.Errorf("%w: channel binding is not offered", errSCRAM)
	}
	i := strings.Index(msg[2:], ",")
	if i < 0 {
		return "", errSCRAM
	}
	x.gs2Header = msg[:2+i+1]
	x.clientFirstBare = msg[2+i+1:]
	var cnonce string
	for _, attr := range strings.Split(x.clientFirstBare, ",") {
		if strings.HasPrefix(attr, "r=") {
			cnonce = attr[2:]
		}
	}
	if cnonce == "" || strings.ContainsAny(cnonce, ", ") {
		return "", fmt.Errorf("%w: no client nonce", errSCRAM)
	}
	raw := make([]byte, 18)
	rand.Read(raw)
	x.nonce = cnonce + base64.StdEncoding.EncodeToString(raw)
	x.serverFirst = fmt.Sprintf("r=%s,s=%s,i=%d", x.nonce, base64.StdEncoding.EncodeToString(x.v.salt), scramIterations)
	return x.serverFirst, nil
}

// final checks the client-final-message's proof and returns the server-final-message.
// ok is false for a wrong password or an unknown user.
func (x *scramExchange) final(msg string) (reply string, ok bool, err error) {
	i := strings.LastIndex(msg, ",p=")
	if i < 0 {
		return "", false, fmt.Errorf("%w: no proof", errSCRAM)
	}
	withoutProof := msg[:i]
	proof, err := base64.StdEncoding.DecodeString(msg[i+3:])
	if err != nil || len(proof) != sha256.Size {
		return "", false, fmt.Errorf("%w: bad proof", errSCRAM)
	}
	var binding, nonce string
	for _, attr := range strings.Split(withoutProof, ",") {
		switch {
		case strings.HasPrefix(attr, "c="):
			binding = attr[2:]
		case strings.HasPrefix(attr, "r="):
			nonce = attr[2:]
		}
	}
	if binding != base64.StdEncoding.EncodeToString([]byte(x.gs2Header)) || nonce != x.nonce {
		return "", false, fmt.Errorf("%w: channel binding or nonce differs", errSCRAM)
	}
	authMessage := x.clientFirstBare + "," + x.serverFirst + "," + withoutProof
	signature := hmacSHA256(x.v.storedKey, authMessage)
	clientKey := make([]byte, sha256.Size)
	for k := range clientKey {
		clientKey[k] = proof[k] ^ signature[k]
	}
	got := sha256.Sum256(clientKey)
	if subtle.ConstantTimeCompare(got[:], x.v.storedKey) != 1 || !x.known {
		return "", false, nil
	}
	return "v=" + base64.StdEncoding.EncodeToString(hmacSHA256(x.v.serverKey, authMessage)), true, nil
}
