// Package demo holds the specs `soak demo` runs: a small batch of our own
// invented heat-treatment cases (demo data, rounded property values),
// embedded in the binary so the demo needs no files beside it.
package demo

import (
	"embed"
	"fmt"
	"io/fs"
	"path"
	"strings"

	"soakfarm/jobspec"
	soakv1 "soakfarm/proto/soak/v1"
)

//go:embed *.yaml
var specFiles embed.FS

// Case is one demo job.
type Case struct {
	// Slug is the spec file's base name; the demo writes the job's files
	// into a folder of that name.
	Slug string
	Spec *soakv1.JobSpec
}

// Cases parses and validates the embedded specs, in file-name order.
func Cases() ([]Case, error) {
	names, err := fs.Glob(specFiles, "*.yaml")
	if err != nil {
		return nil, err
	}
	cases := make([]Case, 0, len(names))
	for _, name := range names {
		data, err := specFiles.ReadFile(name)
		if err != nil {
			return nil, err
		}
		spec, err := jobspec.Parse(data, "yaml")
		if err == nil {
			err = jobspec.Validate(spec, jobspec.DefaultLimits())
		}
		if err != nil {
			return nil, fmt.Errorf("demo spec %s: %w", name, err)
		}
		cases = append(cases, Case{Slug: strings.TrimSuffix(name, path.Ext(name)), Spec: spec})
	}
	return cases, nil
}
