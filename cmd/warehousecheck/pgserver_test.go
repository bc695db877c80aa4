package warehousecheck

import (
	"context"
	"fmt"
	"net"
	"os"
	"os/exec"
	"os/user"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/jackc/pgx/v5"
)

// pgBin is where Debian's postgresql-15 package puts the server.
const pgBin = "/usr/lib/postgresql/15/bin"

// pgServer is a PostgreSQL 15 server a test started: its own data
// folder, a free port on loopback, trust authentication for the
// superuser postgres. PostgreSQL refuses to run as root, so under root
// the server runs as the user nobody.
type pgServer struct {
	port int
	dir  string
	cmd  *exec.Cmd
}

// needPostgres skips the test when the PostgreSQL 15 binaries are not
// installed (.ci/run installs them, so CI never skips).
func needPostgres(t testing.TB) {
	t.Helper()
	if _, err := os.Stat(filepath.Join(pgBin, "postgres")); err != nil {
		t.Skipf("PostgreSQL 15 is not installed (%v): apt-get install postgresql-15", err)
	}
}

// runAs runs a PostgreSQL program, as nobody when this process is root.
func runAs(name string, args ...string) *exec.Cmd {
	path := filepath.Join(pgBin, name)
	if os.Geteuid() != 0 {
		return exec.Command(path, args...)
	}
	return exec.Command("runuser", append([]string{"-u", "nobody", "--", path}, args...)...)
}

// freePort returns a TCP port on loopback that was free a moment ago.
func freePort(t testing.TB) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// analyticSettings are what a server for one analytical query at a time
// would be given in place of the defaults (work_mem 4MB, shared_buffers
// 128MB): sorts and hashes of a million units in memory, two workers per
// parallel scan (the machines here have two cores). Every server of the
// tests and benchmarks starts with them.
var analyticSettings = []string{
	"work_mem=256MB",
	"hash_mem_multiplier=2",
	"max_parallel_workers_per_gather=2",
	"shared_buffers=1GB",
}

// startPostgres initialises a data folder and starts a server on it; the
// test's cleanup stops it and removes the folder.
func startPostgres(t testing.TB) *pgServer {
	t.Helper()
	needPostgres(t)
	dir, err := os.MkdirTemp("", "armtally-pg-")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { os.RemoveAll(dir) })
	if os.Geteuid() == 0 {
		u, err := user.Lookup("nobody")
		if err != nil {
			t.Fatal(err)
		}
		uid, _ := strconv.Atoi(u.Uid)
		gid, _ := strconv.Atoi(u.Gid)
		if err := os.Chown(dir, uid, gid); err != nil {
			t.Fatal(err)
		}
	}
	data := filepath.Join(dir, "data")
	if out, err := runAs("initdb", "-D", data, "-U", "postgres", "--auth=trust", "-E", "UTF8", "--locale=C.UTF-8").CombinedOutput(); err != nil {
		t.Fatalf("initdb: %v\n%s", err, out)
	}
	s := &pgServer{port: freePort(t), dir: dir}
	args := []string{"-D", data, "-p", strconv.Itoa(s.port), "-k", dir,
		"-c", "listen_addresses=127.0.0.1", "-c", "fsync=off", "-c", "synchronous_commit=off", "-c", "full_page_writes=off"}
	for _, kv := range analyticSettings {
		args = append(args, "-c", kv)
	}
	s.cmd = runAs("postgres", args...)
	logf, err := os.Create(filepath.Join(dir, "server.log"))
	if err != nil {
		t.Fatal(err)
	}
	s.cmd.Stdout, s.cmd.Stderr = logf, logf
	s.cmd.SysProcAttr = &syscall.SysProcAttr{Setpgid: true}
	if err := s.cmd.Start(); err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() {
		// SIGINT is the fast shutdown; runuser passes it on.
		_ = syscall.Kill(-s.cmd.Process.Pid, syscall.SIGINT)
		_ = s.cmd.Wait()
		logf.Close()
	})
	deadline := time.Now().Add(30 * time.Second)
	for {
		c, err := pgx.Connect(context.Background(), s.url())
		if err == nil {
			c.Close(context.Background())
			return s
		}
		if time.Now().After(deadline) {
			log, _ := os.ReadFile(filepath.Join(dir, "server.log"))
			t.Fatalf("PostgreSQL did not start: %v\n%s", err, log)
		}
		time.Sleep(100 * time.Millisecond)
	}
}

func (s *pgServer) url() string {
	return fmt.Sprintf("postgres://postgres@127.0.0.1:%d/postgres?sslmode=disable", s.port)
}

// connect opens a connection whose session time zone is UTC.
func (s *pgServer) connect(t testing.TB) *pgx.Conn {
	t.Helper()
	cfg, err := pgx.ParseConfig(s.url())
	if err != nil {
		t.Fatal(err)
	}
	cfg.RuntimeParams["timezone"] = "UTC"
	c, err := pgx.ConnectConfig(context.Background(), cfg)
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { c.Close(context.Background()) })
	return c
}

func exec1(t testing.TB, c *pgx.Conn, stmts ...string) {
	t.Helper()
	for _, s := range stmts {
		if _, err := c.Exec(context.Background(), s); err != nil {
			t.Fatalf("%v\n%s", err, s)
		}
	}
}

// eventColumns is the event table's definition on every server.
const eventColumns = `(user_id text, ts timestamptz, event text, experiment text, arm text, platform text, country text)`

// load copies rows into the named table.
func load(t testing.TB, c *pgx.Conn, table string, rows []logRow) {
	t.Helper()
	src := pgx.CopyFromSlice(len(rows), func(i int) ([]any, error) {
		r := rows[i]
		var ts any
		if r.TS != nil {
			ts = time.UnixMicro(*r.TS).UTC()
		}
		return []any{r.User, ts, r.Event, r.Experiment, r.Arm, r.Platform, r.Country}, nil
	})
	n, err := c.CopyFrom(context.Background(), pgx.Identifier(strings.Split(table, ".")), []string{"user_id", "ts", "event", "experiment", "arm", "platform", "country"}, src)
	if err != nil {
		t.Fatal(err)
	}
	if n != int64(len(rows)) {
		t.Fatalf("copied %d rows of %d", n, len(rows))
	}
}

// sharded starts a coordinator and two shard servers: on the
// coordinator, the table events is hash-partitioned by user_id, and each
// of its two partitions is a postgres_fdw foreign table on a shard. The
// foreign servers are async_capable, so an Append over both partitions
// waits on the two shards at once, and fetch rows in batches of 50,000.
// It returns the coordinator's connection and each shard's.
func sharded(t testing.TB) (conn *pgx.Conn, shards []*pgx.Conn) {
	t.Helper()
	coord := startPostgres(t)
	conn = coord.connect(t)
	exec1(t, conn, "CREATE EXTENSION postgres_fdw",
		"CREATE TABLE events "+eventColumns+" PARTITION BY HASH (user_id)")
	for i := 0; i < 2; i++ {
		shard := startPostgres(t)
		sc := shard.connect(t)
		shards = append(shards, sc)
		part := fmt.Sprintf("events_p%d", i)
		exec1(t, sc, "CREATE TABLE "+part+" "+eventColumns)
		exec1(t, conn,
			fmt.Sprintf("CREATE SERVER shard%d FOREIGN DATA WRAPPER postgres_fdw OPTIONS (host '127.0.0.1', port '%d', dbname 'postgres', fetch_size '50000', batch_size '1000', async_capable 'true')", i, shard.port),
			fmt.Sprintf("CREATE USER MAPPING FOR postgres SERVER shard%d OPTIONS (user 'postgres')", i),
			fmt.Sprintf("CREATE FOREIGN TABLE %s PARTITION OF events FOR VALUES WITH (MODULUS 2, REMAINDER %d) SERVER shard%d OPTIONS (table_name '%s')", part, i, i, part))
	}
	return conn, shards
}

// partitionRows returns the number of rows on each shard, through the
// coordinator's foreign tables.
func partitionRows(t testing.TB, c *pgx.Conn) []int64 {
	t.Helper()
	var out []int64
	for i := 0; i < 2; i++ {
		var n int64
		if err := c.QueryRow(context.Background(), "SELECT count(*) FROM events_p"+strconv.Itoa(i)).Scan(&n); err != nil {
			t.Fatal(err)
		}
		out = append(out, n)
	}
	return out
}
