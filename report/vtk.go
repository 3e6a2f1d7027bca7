package report

import (
	"encoding/base64"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"path/filepath"
)

// Snapshot is the temperature field at one time, for VTK output.
type Snapshot struct {
	Time     float64    // s
	N        [3]int     // cells along x, y, z
	Origin   [3]float64 // low corner of the grid, m
	CellSize float64    // m
	// TempC holds every grid cell's temperature in deg C (index
	// i + N[0]*(j + N[1]*k)); cells outside the part are ignored.
	TempC []float64
	// Part marks the cells of the part (region number, 0 outside).
	Part []uint8
}

// WriteSnapshot writes s as VTK XML image data (.vti) into dir, with cell
// arrays temperature_c (Float32) and part (UInt8), and returns the file name.
func WriteSnapshot(dir string, s Snapshot) (string, error) {
	name := SnapshotFile(s.Time)
	cells := s.N[0] * s.N[1] * s.N[2]
	if len(s.TempC) != cells || len(s.Part) != cells {
		return "", fmt.Errorf("snapshot: %d temperatures and %d part flags for %d cells", len(s.TempC), len(s.Part), cells)
	}
	err := writeFile(filepath.Join(dir, name), func(w io.Writer) error {
		fmt.Fprintf(w, "<?xml version=\"1.0\"?>\n")
		fmt.Fprintf(w, "<VTKFile type=\"ImageData\" version=\"1.0\" byte_order=\"LittleEndian\" header_type=\"UInt64\">\n")
		fmt.Fprintf(w, "  <ImageData WholeExtent=\"0 %d 0 %d 0 %d\" Origin=\"%g %g %g\" Spacing=\"%g %g %g\">\n",
			s.N[0], s.N[1], s.N[2], s.Origin[0], s.Origin[1], s.Origin[2], s.CellSize, s.CellSize, s.CellSize)
		fmt.Fprintf(w, "    <FieldData>\n      <DataArray type=\"Float64\" Name=\"time_s\" NumberOfTuples=\"1\" format=\"ascii\">%g</DataArray>\n    </FieldData>\n", s.Time)
		fmt.Fprintf(w, "    <Piece Extent=\"0 %d 0 %d 0 %d\">\n      <CellData Scalars=\"temperature_c\">\n", s.N[0], s.N[1], s.N[2])

		temps := make([]byte, 8+4*cells)
		binary.LittleEndian.PutUint64(temps, uint64(4*cells))
		for c, t := range s.TempC {
			if s.Part[c] == 0 {
				t = math.NaN()
			}
			binary.LittleEndian.PutUint32(temps[8+4*c:], math.Float32bits(float32(t)))
		}
		if err := dataArray(w, "Float32", "temperature_c", temps); err != nil {
			return err
		}
		part := make([]byte, 8+cells)
		binary.LittleEndian.PutUint64(part, uint64(cells))
		copy(part[8:], s.Part)
		if err := dataArray(w, "UInt8", "part", part); err != nil {
			return err
		}
		_, err := fmt.Fprintf(w, "      </CellData>\n    </Piece>\n  </ImageData>\n</VTKFile>\n")
		return err
	})
	return name, err
}

// dataArray writes one inline binary (base64) data array whose bytes
// already start with the UInt64 byte count VTK expects.
func dataArray(w io.Writer, typ, name string, raw []byte) error {
	if _, err := fmt.Fprintf(w, "        <DataArray type=\"%s\" Name=\"%s\" format=\"binary\">\n          ", typ, name); err != nil {
		return err
	}
	enc := base64.NewEncoder(base64.StdEncoding, w)
	if _, err := enc.Write(raw); err != nil {
		return err
	}
	if err := enc.Close(); err != nil {
		return err
	}
	_, err := fmt.Fprintf(w, "\n        </DataArray>\n")
	return err
}
