// Package report writes a job's result files: the probe history as CSV,
// the summary as JSON, the history plot as PNG and 3-D snapshots as VTK
// XML image data. It formats; it computes nothing physical.
package report

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"

	soakv1 "soakfarm/proto/soak/v1"
)

// Caution is carried by the README, every summary and the CLI's final
// screen.
const Caution = "Engineering estimate only: confirm soak and cooling times by measurement " +
	"(thermocouples in a trial load) before relying on them. Hot parts, furnaces, " +
	"salt and oil quench baths and hot gases cause serious burns and fires. " +
	"The heat-treatment specification, pressure-equipment and food-safety rules " +
	"of the place of use, and licensed practice, govern."

// File names of the result files, shared by the pipeline, the farm and
// the client.
const (
	ProbesFile  = "probes.csv"
	SummaryFile = "summary.json"
	HistoryFile = "history.png"
)

// SnapshotFile names the VTK snapshot taken at simulated time t seconds.
func SnapshotFile(t float64) string {
	return "snapshot-" + strings.ReplaceAll(strconv.FormatFloat(t, 'f', -1, 64), ".", "_") + "s.vti"
}

// Row is one line of the probe history.
type Row struct {
	Time           float64   // s
	Probes         []float64 // deg C, in probe order
	Min, Max, Mean float64   // deg C over the part's cells
	EnergyFraction float64
}

// ProbeWriter streams probes.csv.
type ProbeWriter struct {
	f *os.File
	w *bufio.Writer
}

// NewProbeWriter creates path and writes the header
// time_s,<probe>_c,...,min_c,max_c,mean_c,energy_fraction.
func NewProbeWriter(path string, probeNames []string) (*ProbeWriter, error) {
	f, err := os.Create(path)
	if err != nil {
		return nil, fmt.Errorf("create probe history: %w", err)
	}
	w := bufio.NewWriter(f)
	cols := []string{"time_s"}
	for _, n := range probeNames {
		cols = append(cols, n+"_c")
	}
	cols = append(cols, "min_c", "max_c", "mean_c", "energy_fraction")
	if _, err := w.WriteString(strings.Join(cols, ",") + "\n"); err != nil {
		f.Close()
		return nil, fmt.Errorf("write probe history: %w", err)
	}
	return &ProbeWriter{f: f, w: w}, nil
}

// Write appends one row.
func (p *ProbeWriter) Write(r Row) error {
	b := make([]byte, 0, 32*(len(r.Probes)+5))
	b = strconv.AppendFloat(b, r.Time, 'g', -1, 64)
	for _, v := range r.Probes {
		b = append(b, ',')
		b = strconv.AppendFloat(b, v, 'f', 4, 64)
	}
	for _, v := range []float64{r.Min, r.Max, r.Mean} {
		b = append(b, ',')
		b = strconv.AppendFloat(b, v, 'f', 4, 64)
	}
	b = append(b, ',')
	b = strconv.AppendFloat(b, r.EnergyFraction, 'f', 6, 64)
	b = append(b, '\n')
	if _, err := p.w.Write(b); err != nil {
		return fmt.Errorf("write probe history: %w", err)
	}
	return nil
}

// Close flushes and closes the file.
func (p *ProbeWriter) Close() error {
	ferr := p.w.Flush()
	cerr := p.f.Close()
	if ferr != nil {
		return fmt.Errorf("write probe history: %w", ferr)
	}
	if cerr != nil {
		return fmt.Errorf("close probe history: %w", cerr)
	}
	return nil
}

// MarshalSummary renders a summary as indented JSON with the schema's
// snake_case key names; a milestone that was not reached shows time_s null.
func MarshalSummary(s *soakv1.Summary) ([]byte, error) {
	b, err := protojson.MarshalOptions{Multiline: true, Indent: "  ", UseProtoNames: true, EmitUnpopulated: true}.Marshal(s)
	if err != nil {
		return nil, fmt.Errorf("encode summary: %w", err)
	}
	return append(b, '\n'), nil
}

// WriteSummary writes summary.json into dir.
func WriteSummary(dir string, s *soakv1.Summary) error {
	b, err := MarshalSummary(s)
	if err != nil {
		return err
	}
	return writeFile(filepath.Join(dir, SummaryFile), func(w io.Writer) error {
		_, err := w.Write(b)
		return err
	})
}

// ReadSummary reads summary.json from dir.
func ReadSummary(dir string) (*soakv1.Summary, error) {
	b, err := os.ReadFile(filepath.Join(dir, SummaryFile))
	if err != nil {
		return nil, fmt.Errorf("read summary: %w", err)
	}
	var s soakv1.Summary
	if err := protojson.Unmarshal(b, &s); err != nil {
		return nil, fmt.Errorf("decode summary: %w", err)
	}
	return &s, nil
}

// writeFile writes a file through a buffer and reports the first error,
// including the one closing it.
func writeFile(path string, fill func(io.Writer) error) error {
	f, err := os.Create(path)
	if err != nil {
		return fmt.Errorf("create %s: %w", filepath.Base(path), err)
	}
	w := bufio.NewWriterSize(f, 1<<16)
	err = fill(w)
	if err == nil {
		err = w.Flush()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("write %s: %w", filepath.Base(path), err)
	}
	return nil
}
