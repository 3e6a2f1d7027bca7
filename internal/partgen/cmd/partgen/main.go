// Command partgen writes soakfarm's shared STL test parts into a folder.
package main

import (
	"flag"
	"fmt"
	"log/slog"
	"os"
	"path/filepath"

	"soakfarm/internal/partgen"
)

func main() {
	out := flag.String("out", "testdata/parts", "folder to write the STL files into")
	flag.Parse()
	if err := run(*out); err != nil {
		fmt.Fprintln(os.Stderr, "partgen:", err)
		os.Exit(1)
	}
}

func run(dir string) error {
	files, err := partgen.TestParts()
	if err != nil {
		return err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	for _, f := range files {
		path := filepath.Join(dir, f.Name)
		if err := os.WriteFile(path, f.Data, 0o644); err != nil {
			return err
		}
		slog.Info("wrote", "file", path, "bytes", len(f.Data))
	}
	return nil
}
