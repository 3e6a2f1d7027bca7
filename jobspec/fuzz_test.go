package jobspec_test

import (
	"encoding/json"
	"errors"
	"testing"

	"soakfarm/jobspec"
)

// FuzzParse feeds arbitrary bytes through Parse and Validate in every
// format: neither may panic, errors must carry their problems, and a spec
// that validates must survive a round trip through JSON. The seed corpus in
// testdata/fuzz/FuzzParse holds the shared testdata specs.
func FuzzParse(f *testing.F) {
	f.Fuzz(func(t *testing.T, data []byte) {
		for _, format := range []string{"", "yaml", "json"} {
			spec, err := jobspec.Parse(data, format)
			if err == nil && format == "json" {
				sameNameAsEncodingJSON(t, data, spec.GetName())
			}
			if err != nil {
				if spec != nil {
					t.Fatalf("format %q: Parse returned a spec with error %v", format, err)
				}
				checkProblems(t, err)
				continue
			}
			err = jobspec.Validate(spec, jobspec.DefaultLimits())
			if err != nil {
				checkProblems(t, err)
				continue
			}
			assertRoundTrip(t, spec)
		}
	})
}

// sameNameAsEncodingJSON checks the name read from JSON against the
// standard library's decoder, which JSON's escapes are the harder part of.
func sameNameAsEncodingJSON(t *testing.T, data []byte, name string) {
	t.Helper()
	var want struct {
		Name string `json:"name"`
	}
	if err := json.Unmarshal(data, &want); err != nil {
		t.Fatalf("Parse read JSON that encoding/json refuses: %v", err)
	}
	if name != want.Name {
		t.Fatalf("name %q, encoding/json reads %q", name, want.Name)
	}
}

func checkProblems(t *testing.T, err error) {
	t.Helper()
	var verr *jobspec.ValidationError
	if errors.As(err, &verr) && len(verr.Problems) == 0 {
		t.Fatal("ValidationError without problems")
	}
	if err.Error() == "" {
		t.Fatal("empty error message")
	}
}
