package store

import (
	"crypto/rand"
	"crypto/sha256"
	"encoding/hex"
	"slices"
	"strings"
	"time"
)

// idAlphabet is Crockford's base32 in lower case. Its characters are in
// ascending byte order, so ids sort as their timestamps do.
const idAlphabet = "0123456789abcdefghjkmnpqrstvwxyz"

// idLength is 10 characters of millisecond time (50 bits) and 16 of
// randomness (80 bits).
const idLength = 26

// NewJobID returns a random id whose byte order follows the submit time to
// the millisecond, so listing keys in reverse order lists jobs newest
// first.
func NewJobID(now time.Time) string {
	var id [idLength]byte
	ms := uint64(now.UnixMilli())
	for i := 9; i >= 0; i-- {
		id[i] = idAlphabet[ms&31]
		ms >>= 5
	}
	var random [16]byte
	rand.Read(random[:]) // never fails (crypto/rand documents it)
	for i, b := range random {
		id[10+i] = idAlphabet[b&31]
	}
	return string(id[:])
}

// ValidJobID reports whether id has the shape NewJobID makes. Callers check
// ids from outside before using them as keys or subject tokens.
func ValidJobID(id string) bool {
	if len(id) != idLength {
		return false
	}
	for i := 0; i < len(id); i++ {
		if !isIDChar(id[i]) {
			return false
		}
	}
	return true
}

func isIDChar(c byte) bool {
	return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'z' && c != 'i' && c != 'l' && c != 'o' && c != 'u')
}

// SortNewestFirst orders job ids by descending time.
func SortNewestFirst(ids []string) {
	slices.SortFunc(ids, func(a, b string) int { return strings.Compare(b, a) })
}

// clientKeyKey turns a client key of any bytes into a KV key: KV keys allow
// only a few characters, so the key is stored by its SHA-256.
func clientKeyKey(key string) string {
	sum := sha256.Sum256([]byte(key))
	return hex.EncodeToString(sum[:])
}
