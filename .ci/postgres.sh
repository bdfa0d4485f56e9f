#!/usr/bin/env bash
# Starts a throwaway PostgreSQL cluster for the store tests and exports its URL as
# TEST_POSTGRES_URL_FOR_STARTMARGIN; stop it with stop_test_postgres (or at exit: `trap`).
# Source it: `. .ci/postgres.sh && start_test_postgres`. Installs the Debian package
# `postgresql` when initdb is missing and we are root (CI). As root the cluster runs as the
# `postgres` OS user; otherwise as the current user. Trust auth on 127.0.0.1 only, a fixed
# unusual port (TEST_POSTGRES_PORT_FOR_STARTMARGIN, default 54329).

pg_bin_dir() {
  local initdb
  initdb=$(command -v initdb 2>/dev/null || ls /usr/lib/postgresql/*/bin/initdb 2>/dev/null | sort -V | tail -n1)
  [ -n "$initdb" ] && dirname "$(readlink -f "$initdb")"
}

start_test_postgres() {
  local bin port run_as=()
  bin=$(pg_bin_dir || true)
  if [ -z "$bin" ]; then
    if [ "$(id -u)" = 0 ]; then
      echo "== installing postgresql (Debian package)"
      # No default cluster: the package would otherwise create and start one on port 5432.
      mkdir -p /etc/postgresql-common
      echo "create_main_cluster = false" >/etc/postgresql-common/createcluster.conf
      apt-get update -qq
      DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends \
        -o Dpkg::Options::=--force-confold postgresql >/dev/null
      bin=$(pg_bin_dir)
    else
      echo "initdb not found: install the postgresql package (apt-get install postgresql)" >&2
      return 1
    fi
  fi
  port=${TEST_POSTGRES_PORT_FOR_STARTMARGIN:-54329}
  PG_TEST_DIR=$(mktemp -d /tmp/startmargin-pg.XXXXXX)
  if [ "$(id -u)" = 0 ]; then
    id postgres >/dev/null 2>&1 || useradd --system --home-dir "$PG_TEST_DIR" postgres
    chown postgres "$PG_TEST_DIR"
    run_as=(runuser -u postgres --)
  fi
  PG_TEST_RUN_AS=("${run_as[@]}")
  PG_TEST_BIN=$bin
  "${run_as[@]}" "$bin/initdb" -D "$PG_TEST_DIR/data" -U postgres --auth=trust \
    --no-instructions -E UTF8 --locale=C.UTF-8 >/dev/null || return 1
  "${run_as[@]}" "$bin/pg_ctl" -D "$PG_TEST_DIR/data" -l "$PG_TEST_DIR/log" -w -t 60 \
    -o "-c listen_addresses=127.0.0.1 -p $port -k $PG_TEST_DIR -c fsync=on -c max_connections=200" \
    start >/dev/null || { cat "$PG_TEST_DIR/log" >&2; return 1; }
  "${run_as[@]}" "$bin/createdb" -h 127.0.0.1 -p "$port" -U postgres startmargin_test || return 1
  export TEST_POSTGRES_URL_FOR_STARTMARGIN="postgres://postgres@127.0.0.1:$port/startmargin_test"
  echo "== PostgreSQL test cluster on 127.0.0.1:$port ($("$bin/postgres" --version))"
}

stop_test_postgres() {
  if [ -n "${PG_TEST_DIR:-}" ] && [ -d "$PG_TEST_DIR/data" ]; then
    "${PG_TEST_RUN_AS[@]}" "$PG_TEST_BIN/pg_ctl" -D "$PG_TEST_DIR/data" -m fast -w stop >/dev/null || true
    rm -rf "$PG_TEST_DIR"
  fi
}
