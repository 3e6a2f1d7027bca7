package demo

import "testing"

func TestCasesAreValidAndDistinct(t *testing.T) {
	t.Parallel()
	cases, err := Cases()
	if err != nil {
		t.Fatal(err)
	}
	if len(cases) < 3 || len(cases) > 4 {
		t.Errorf("%d demo cases, want a batch of 3 or 4", len(cases))
	}
	seen := map[string]bool{}
	for _, c := range cases {
		if c.Spec.GetName() != c.Slug {
			t.Errorf("%s.yaml: name %q, want the file's base name so folders and jobs match", c.Slug, c.Spec.GetName())
		}
		if seen[c.Slug] {
			t.Errorf("two demo cases named %s", c.Slug)
		}
		seen[c.Slug] = true
		// The demo must stay quick on two cores: coarse grids only.
		if n := c.Spec.GetCellsAcross(); n == 0 || n > 24 {
			t.Errorf("%s: cells_across %d, want 1..24 for a demo", c.Slug, n)
		}
	}
}
