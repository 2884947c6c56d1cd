#!/usr/bin/env bash
# Start a throw-away PostgreSQL cluster on loopback for the store tests and print its URL.
# Usage: eval "$(bash .ci/postgres.sh)"   -> exports DRAWERFIT_TEST_PG_URL
# Needs Debian's postgresql package (apt-get install -y postgresql). Runs the server as the
# 'postgres' system user, trust authentication on 127.0.0.1 only.
set -euo pipefail
PORT="${DRAWERFIT_PG_PORT:-54329}"
DIR="${DRAWERFIT_PG_DIR:-/tmp/drawerfit-pg}"
BIN="$(ls -d /usr/lib/postgresql/*/bin | sort -V | tail -n 1)"
if ! "$BIN/pg_isready" -q -h 127.0.0.1 -p "$PORT" 2>/dev/null; then
  rm -rf "$DIR"; mkdir -p "$DIR"; chown postgres:postgres "$DIR"
  su postgres -s /bin/sh -c "'$BIN/initdb' -D '$DIR/data' -A trust -U postgres -E UTF8 >/dev/null"
  su postgres -s /bin/sh -c "'$BIN/pg_ctl' -D '$DIR/data' -l '$DIR/log' -w \
      -o \"-h 127.0.0.1 -p $PORT -k '$DIR'\" start >/dev/null"
fi
"$BIN/psql" -h 127.0.0.1 -p "$PORT" -U postgres -tAc "SELECT 1 FROM pg_database WHERE datname='drawerfit_test'" \
  | grep -q 1 || "$BIN/createdb" -h 127.0.0.1 -p "$PORT" -U postgres drawerfit_test
echo "export DRAWERFIT_TEST_PG_URL=postgresql+psycopg://postgres@127.0.0.1:$PORT/drawerfit_test"
