package stl

import (
	"os"
	"path/filepath"
	"testing"
)

func TestSmoke(t *testing.T) {
	fs, _ := filepath.Glob("../../testdata/parts/*.stl")
	for _, f := range fs {
		r, _ := os.Open(f)
		m, err := Read(r, Options{Units: "mm"})
		r.Close()
		if err != nil {
			t.Logf("%s: read: %v", f, err)
			continue
		}
		rep := Check(m)
		t.Logf("%s: %s\n", filepath.Base(f), rep)
		b, err := NewBody(m)
		if err != nil {
			t.Logf("  body: %v", err)
			continue
		}
		lo, hi := b.Bounds()
		c := scale(add(lo, hi), 0.5)
		t.Logf("  vol %.9g area %.9g w(centre)=%.6f groups %v", b.Volume()*1e9, b.Area()*1e6, b.WindingNumber(c), b.FaceGroups())
	}
}
