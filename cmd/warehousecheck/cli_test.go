package warehousecheck

import (
	"bytes"
	"os"
	"os/exec"
	"path/filepath"
	"testing"
)

// buildArmtally builds the armtally command into a temporary folder.
func buildArmtally(t *testing.T) string {
	t.Helper()
	bin := filepath.Join(t.TempDir(), "armtally")
	// Built in the main module, with its own go.sum.
	cmd := exec.Command("go", "build", "-o", bin, "./cmd/armtally")
	cmd.Dir = filepath.Join("..", "..")
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	return bin
}

// TestAnalyzePostgresCommand runs the one-command path, armtally analyze
// --postgres URL --table NAME, against a server holding a generated log,
// and checks that its Markdown and JSON readouts are those of armtally
// analyze over the same rows in a Parquet file.
func TestAnalyzePostgresCommand(t *testing.T) {
	s := startPostgres(t)
	c := s.connect(t)
	rows := genRows(9, 1200)
	dir := t.TempDir()
	path := writeLog(t, dir, rows)
	exec1(t, c, "CREATE SCHEMA analytics", "CREATE TABLE analytics.events "+eventColumns)
	load(t, c, "analytics.events", rows)
	bin := buildArmtally(t)
	flags := []string{"--experiment", "checkout-2026", "--arms", `control,treatment,"o'brien ""b"" \arm;"`, // --arms reads CSV
		"--start", "2026-03-03", "--end", "2026-03-16T12:00:00Z", "--multi-arm", "first",
		"--metric", "purchase=purchase:7d", "--metric", "engaged=signup,refund:36h", "--segment", "platform"}
	run := func(name string, args ...string) ([]byte, []byte) {
		jsonPath := filepath.Join(dir, name+".json")
		cmd := exec.Command(bin, append(append([]string{"analyze"}, args...), append(flags, "--json", jsonPath)...)...)
		var stderr bytes.Buffer
		cmd.Stderr = &stderr
		md, err := cmd.Output()
		if err != nil {
			t.Fatalf("armtally %v: %v\n%s", args, err, stderr.Bytes())
		}
		js, err := os.ReadFile(jsonPath)
		if err != nil {
			t.Fatal(err)
		}
		return md, js
	}
	fileMD, fileJSON := run("file", path, "--max-bad-rows", "-1")
	pgMD, pgJSON := run("pg", "--postgres", s.url(), "--table", "analytics.events")
	sameReadouts(t, "JSON", fileJSON, pgJSON)
	sameReadouts(t, "Markdown", fileMD, pgMD)
}
