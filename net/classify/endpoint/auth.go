package endpoint

import (
	"crypto/sha256"
	"crypto/subtle"
	"errors"
	"net/http"
	"strings"
)

// tokenSet holds the SHA-256 of each accepted bearer token. Comparing
// fixed-length digests with subtle.ConstantTimeCompare takes the same
// time whatever the length of the token presented or where it differs.
type tokenSet struct{ sums [][sha256.Size]byte }

// checkToken reports whether t is a b64token, the syntax of a bearer
// token (RFC 6750 §2.1): 1*( ALPHA / DIGIT / "-" / "." / "_" / "~" / "+"
// / "/" ) *"=".
func checkToken(t string) error {
	body := strings.TrimRight(t, "=")
	if body == "" {
		return errors.New("an empty bearer token (or one of '=' only)")
	}
	for _, c := range []byte(body) {
		switch {
		case 'A' <= c && c <= 'Z', 'a' <= c && c <= 'z', '0' <= c && c <= '9':
		case c == '-' || c == '.' || c == '_' || c == '~' || c == '+' || c == '/':
		default:
			return errors.New("a bearer token may hold only letters, digits, - . _ ~ + / and trailing = (RFC 6750 §2.1)")
		}
	}
	return nil
}

// SetTokens replaces the bearer tokens that POST /classify and GET /model
// require (see Options.Tokens); no tokens turns authentication off. It
// returns an error, and keeps the tokens it had, when a token is not a
// valid bearer token. Requests already past the check are not affected.
func (h *Handler) SetTokens(tokens []string) error {
	ts := &tokenSet{}
	for _, t := range tokens {
		if err := checkToken(t); err != nil {
			return err
		}
		ts.sums = append(ts.sums, sha256.Sum256([]byte(t)))
	}
	h.tokens.Store(ts)
	return nil
}

// bearer returns the token of an "Authorization: Bearer <token>" header.
// The scheme is matched without regard to case (RFC 9110 §11.1).
func bearer(header string) (string, bool) {
	scheme, tok, ok := strings.Cut(header, " ")
	if !ok || !strings.EqualFold(scheme, "Bearer") {
		return "", false
	}
	tok = strings.Trim(tok, " ")
	return tok, tok != ""
}

// authorized checks the request's bearer token when the handler has
// tokens; on failure it answers 401 with a Bearer challenge and the JSON
// error body, and returns false.
func (h *Handler) authorized(w http.ResponseWriter, r *http.Request) bool {
	ts := h.tokens.Load()
	if ts == nil || len(ts.sums) == 0 {
		return true
	}
	tok, ok := bearer(r.Header.Get("Authorization"))
	if !ok {
		// No credentials: the challenge carries no error code (RFC 6750 §3.1).
		w.Header().Set("WWW-Authenticate", `Bearer realm="rhomb"`)
		h.fail(w, http.StatusUnauthorized, ErrorDetail{Message: "this route needs a bearer token: send the header Authorization: Bearer <token>"})
		return false
	}
	sum := sha256.Sum256([]byte(tok))
	match := 0
	for i := range ts.sums {
		match |= subtle.ConstantTimeCompare(sum[:], ts.sums[i][:])
	}
	if match != 1 {
		w.Header().Set("WWW-Authenticate", `Bearer realm="rhomb", error="invalid_token", error_description="the token is not accepted"`)
		h.fail(w, http.StatusUnauthorized, ErrorDetail{Message: "the bearer token is not accepted"})
		return false
	}
	return true
}

// Authorize wraps next with the handler's bearer-token check, for routes
// a server adds beside the handler's own (such as a metrics page): a
// request without an accepted token gets 401 with the handler's JSON
// error body, and one with an accepted token, or any request while the
// handler has no tokens, goes to next.
func (h *Handler) Authorize(next http.Handler) http.Handler {
	return http.HandlerFunc(func(w http.ResponseWriter, r *http.Request) {
		if h.authorized(w, r) {
			next.ServeHTTP(w, r)
		}
	})
}
