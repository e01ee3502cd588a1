# Sourced by .ci/run: a throw-away PostgreSQL cluster for the archive tests
# (procedure/archive, cmd/nullbench archive). pg_start installs the server
# from the Debian packages when missing, creates a cluster in a temporary
# folder owned by an unprivileged user (initdb refuses root), starts it on a
# free local port, and exports NULLBENCH_TEST_POSTGRES; pg_stop stops it and
# removes the folder.

pg_bindir() {
  local d
  if command -v initdb >/dev/null 2>&1 && command -v pg_ctl >/dev/null 2>&1; then
    dirname "$(readlink -f "$(command -v initdb)")"
    return 0
  fi
  d=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1)
  if [ -n "$d" ] && [ -x "$d/initdb" ]; then
    echo "$d"
    return 0
  fi
  return 1
}

pg_start() {
  local bindir user port
  if ! bindir=$(pg_bindir); then
    echo "ci: installing PostgreSQL from the system packages"
    apt-get update -qq
    DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends postgresql >/dev/null
    bindir=$(pg_bindir) || { echo "ci: PostgreSQL installed but initdb not found" >&2; return 1; }
  fi
  user=$(id -un)
  if [ "$(id -u)" = 0 ]; then
    # initdb and postgres refuse to run as root.
    if id postgres >/dev/null 2>&1; then
      user=postgres
    else
      id nullbench-ci >/dev/null 2>&1 || useradd --system --no-create-home --shell /usr/sbin/nologin nullbench-ci
      user=nullbench-ci
    fi
  fi
  PG_CI_DIR=$(mktemp -d /tmp/nullbench-pg.XXXXXX)
  chmod 0755 "$PG_CI_DIR"
  chown "$user" "$PG_CI_DIR"
  port=55432
  while (exec 3<>"/dev/tcp/127.0.0.1/$port") 2>/dev/null; do
    port=$((port + 1))
  done
  pg_as() {
    if [ "$(id -un)" = "$user" ]; then "$@"; else runuser -u "$user" -- "$@"; fi
  }
  pg_as "$bindir/initdb" -D "$PG_CI_DIR/data" -U nullbench -A trust -E UTF8 --locale=C --no-sync >"$PG_CI_DIR/initdb.log" 2>&1 ||
    { cat "$PG_CI_DIR/initdb.log" >&2; return 1; }
  pg_as "$bindir/pg_ctl" -D "$PG_CI_DIR/data" -l "$PG_CI_DIR/server.log" -w -t 60 \
    -o "-p $port -k $PG_CI_DIR -c listen_addresses=127.0.0.1 -c fsync=off -c max_connections=60" start >/dev/null ||
    { cat "$PG_CI_DIR/server.log" >&2; return 1; }
  PG_CI_USER=$user
  PG_CI_BIN=$bindir
  export NULLBENCH_TEST_POSTGRES="postgres://nullbench@127.0.0.1:$port/postgres?sslmode=disable"
  echo "ci: $("$bindir/postgres" --version) on 127.0.0.1:$port (NULLBENCH_TEST_POSTGRES set)"
}

pg_stop() {
  [ -n "${PG_CI_DIR:-}" ] || return 0
  if [ "$(id -un)" = "$PG_CI_USER" ]; then
    "$PG_CI_BIN/pg_ctl" -D "$PG_CI_DIR/data" -m fast -w stop >/dev/null 2>&1 || true
  else
    runuser -u "$PG_CI_USER" -- "$PG_CI_BIN/pg_ctl" -D "$PG_CI_DIR/data" -m fast -w stop >/dev/null 2>&1 || true
  fi
  rm -rf "$PG_CI_DIR"
  PG_CI_DIR=
}
