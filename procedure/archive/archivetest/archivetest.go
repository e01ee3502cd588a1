// Package archivetest gives tests empty PostgreSQL databases on the server
// that NULLBENCH_TEST_POSTGRES names (.ci/run starts a throw-away one and
// sets it).
package archivetest

import (
	"database/sql"
	"fmt"
	"net/url"
	"os"
	"sync/atomic"
	"testing"
	"time"

	_ "github.com/jackc/pgx/v5/stdlib" // the "pgx" database/sql driver
)

// Env names the environment variable with a PostgreSQL URL whose user may
// create and drop databases.
const Env = "NULLBENCH_TEST_POSTGRES"

var counter atomic.Int64

// PostgresURL creates an empty database on the server named by
// NULLBENCH_TEST_POSTGRES, drops it when the test ends, and returns its
// URL. Without the variable the test is skipped, saying so, except under
// CI (CI=true), where it fails: CI must start a server.
func PostgresURL(t testing.TB) string {
	t.Helper()
	base := os.Getenv(Env)
	if base == "" && os.Getenv("CI") == "true" {
		t.Fatalf("%s is not set under CI: .ci/run must start a PostgreSQL server (.ci/postgres.sh) and set it", Env)
	}
	if base == "" {
		t.Skipf("%s is not set: no PostgreSQL server for this test (.ci/run starts one and sets it)", Env)
	}
	admin, err := sql.Open("pgx", base)
	if err != nil {
		t.Fatalf("%s: %v", Env, err)
	}
	defer admin.Close()
	name := fmt.Sprintf("nbtest_%d_%d_%d", os.Getpid(), time.Now().UnixNano()%1e6, counter.Add(1))
	if _, err := admin.Exec("CREATE DATABASE " + name); err != nil {
		t.Fatalf("create a test database on the server %s names: %v", Env, err)
	}
	t.Cleanup(func() {
		admin, err := sql.Open("pgx", base)
		if err != nil {
			return
		}
		defer admin.Close()
		if _, err := admin.Exec("DROP DATABASE IF EXISTS " + name + " WITH (FORCE)"); err != nil {
			t.Logf("drop test database %s: %v", name, err)
		}
	})
	u, err := url.Parse(base)
	if err != nil {
		t.Fatalf("%s: %v", Env, err)
	}
	u.Path = "/" + name
	return u.String()
}
