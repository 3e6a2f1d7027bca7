package partgen

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
)

// The committed files under testdata/parts are exactly what the generator
// writes today; after a design change run `go generate ./internal/partgen`.
func TestCommittedPartsAreCurrent(t *testing.T) {
	t.Parallel()
	files, err := TestParts()
	if err != nil {
		t.Fatal(err)
	}
	total := 0
	for _, f := range files {
		got, err := os.ReadFile(filepath.Join("../../testdata/parts", f.Name))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, f.Data) {
			t.Errorf("%s differs from the generator's output; run go generate ./internal/partgen", f.Name)
		}
		total += len(got)
	}
	if total > 2<<20 {
		t.Errorf("test parts take %d bytes, over the 2 MB budget", total)
	}
}

// The bracket profile's area by the shoelace formula is the 916 mm² its
// comment states (80·6 + 6·54 + 2·4·14).
func TestBracketProfileArea(t *testing.T) {
	t.Parallel()
	p := BracketProfile()
	var twice float64
	for i, a := range p {
		b := p[(i+1)%len(p)]
		twice += a[0]*b[1] - b[0]*a[1]
	}
	if twice != 2*916 {
		t.Fatalf("profile area %g mm², want 916", twice/2)
	}
	var caps float64
	for _, tri := range earClip(p) {
		caps += orient(tri[0], tri[1], tri[2]) / 2
	}
	if caps != 916 {
		t.Fatalf("ear-clipped area %g mm², want 916", caps)
	}
}
