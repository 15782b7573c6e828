#!/usr/bin/env bash
# A throwaway PostgreSQL cluster for the archive tests, on the loopback address only.
#   tests/pg_cluster.sh start DIR PORT   initdb + start (as the postgres user when run as root)
#   tests/pg_cluster.sh stop DIR         stop it (DIR can then be removed)
# Role postgres connects without a password (trust); role pwcheck needs one (scram), so the
# tests can check the message for a wrong password. Used by .ci/run and tests/conftest.py.
set -euo pipefail
cmd=${1:?start or stop}; dir=${2:?folder}
bindir=""
for candidate in "$(command -v pg_config >/dev/null 2>&1 && pg_config --bindir || true)" \
                 /usr/lib/postgresql/*/bin; do
  if [ -n "$candidate" ] && [ -x "$candidate/initdb" ]; then bindir=$candidate; fi
done
[ -n "$bindir" ] || { echo "no PostgreSQL server binaries (initdb) found" >&2; exit 3; }
as_owner() {
  if [ "$(id -u)" = 0 ]; then su postgres -s /bin/sh -c "$1"; else sh -c "$1"; fi
}
case $cmd in
  start)
    port=${3:?port}
    mkdir -p "$dir"
    [ "$(id -u)" != 0 ] || chown postgres "$dir"
    as_owner "'$bindir/initdb' -D '$dir/data' -A trust -U postgres >'$dir/initdb.log' 2>&1"
    as_owner "printf 'host all pwcheck 127.0.0.1/32 scram-sha-256\nhost all all 127.0.0.1/32 trust\nlocal all all trust\n' >'$dir/data/pg_hba.conf'"
    as_owner "'$bindir/pg_ctl' -D '$dir/data' -o \"-k '$dir' -p $port -c listen_addresses=127.0.0.1 -c fsync=off\" -l '$dir/log' -w start >/dev/null"
    ;;
  stop)
    as_owner "'$bindir/pg_ctl' -D '$dir/data' -m fast -w stop >/dev/null"
    ;;
  *) echo "usage: $0 start DIR PORT | stop DIR" >&2; exit 2 ;;
esac
