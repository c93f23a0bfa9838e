#!/usr/bin/env bash
# Start a throw-away PostgreSQL cluster for the registry tests, on a unix socket only.
#   bash .ci/postgres.sh DIR PORT   -> prints the SQLAlchemy URL of its `postgres` database
# Installs Debian's postgresql when its binaries are missing (CI runs as root). The cluster
# runs as the `postgres` user (initdb refuses root); stop it with
#   runuser -u postgres -- "$(ls -d /usr/lib/postgresql/*/bin | tail -1)/pg_ctl" -D DIR/data stop
set -euo pipefail
dir="$1"
port="${2:-55432}"
if ! ls -d /usr/lib/postgresql/*/bin >/dev/null 2>&1; then
  # The package would start a default cluster on port 5432: a policy-rc.d that refuses
  # service starts keeps the install to the binaries (removed again if we put it there).
  policy=""
  if [ ! -e /usr/sbin/policy-rc.d ]; then
    printf '#!/bin/sh\nexit 101\n' > /usr/sbin/policy-rc.d
    chmod 755 /usr/sbin/policy-rc.d
    policy=/usr/sbin/policy-rc.d
  fi
  apt-get update -qq >&2
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq postgresql >/dev/null
  if [ -n "$policy" ]; then rm -f "$policy"; fi
fi
bin="$(ls -d /usr/lib/postgresql/*/bin | sort -V | tail -1)"
as_postgres() {
  if [ "$(id -u)" = 0 ]; then runuser -u postgres -- "$@"; else "$@"; fi
}
mkdir -p "$dir"
chmod 755 "$dir"
if [ "$(id -u)" = 0 ]; then chown postgres:postgres "$dir"; fi
if [ ! -f "$dir/data/PG_VERSION" ]; then
  as_postgres "$bin/initdb" -D "$dir/data" -U postgres --auth=trust -E UTF8 >/dev/null
fi
if ! as_postgres "$bin/pg_ctl" -D "$dir/data" status >/dev/null 2>&1; then
  as_postgres "$bin/pg_ctl" -D "$dir/data" -l "$dir/server.log" -w -t 60 \
    -o "-k $dir -p $port -c listen_addresses='' -c fsync=off" start >/dev/null
fi
echo "postgresql+psycopg://postgres@/postgres?host=$dir&port=$port"
