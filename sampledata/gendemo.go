//go:build ignore

// Gendemo writes demo/demo.parquet with sampledata.WriteDemo. Run it with
// go generate in the sampledata folder.
package main

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"

	"github.com/armtally/armtally/sampledata"
)

func main() {
	if err := run(filepath.Join("demo", "demo.parquet")); err != nil {
		fmt.Fprintln(os.Stderr, "gendemo:", err)
		os.Exit(1)
	}
}

func run(path string) error {
	var buf bytes.Buffer
	sum, err := sampledata.WriteDemo(&buf)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	// Write atomically: a temporary file in the same folder, then rename.
	tmp, err := os.CreateTemp(filepath.Dir(path), ".demo-*.parquet")
	if err != nil {
		return err
	}
	defer os.Remove(tmp.Name()) // fails harmlessly after the rename
	if _, err := tmp.Write(buf.Bytes()); err != nil {
		tmp.Close()
		return fmt.Errorf("write %s: %w", tmp.Name(), err)
	}
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("close %s: %w", tmp.Name(), err)
	}
	if err := os.Chmod(tmp.Name(), 0o644); err != nil {
		return err
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return err
	}
	fmt.Printf("wrote %s: %d bytes, %d rows, %d units (%d multi-arm), %d never exposed\n",
		path, buf.Len(), sum.Rows, sum.Units, sum.MultiArmUnits, sum.NeverExposedUnits)
	return nil
}
