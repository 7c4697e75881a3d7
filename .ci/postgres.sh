#!/usr/bin/env bash
# A throw-away PostgreSQL cluster for the tests, listening on 127.0.0.1 only.
#
#   postgres.sh install            install the Debian server packages if they are missing (quiet)
#   postgres.sh start DIR PORT     initdb into DIR (once), start on 127.0.0.1:PORT, create the
#                                  database deviation_test; prints its SQLAlchemy URL on stdout
#   postgres.sh stop DIR [MODE]    pg_ctl stop -m MODE (default fast); no error if not running
#
# The server never runs as root: as root, every server command runs as the `postgres` OS user
# (created by the Debian package) and DIR is handed to it. Authentication is `trust` for
# loopback connections of this throw-away cluster only.
set -euo pipefail

die() { echo "postgres.sh: $*" >&2; exit 1; }

bindir() {
    local d
    d=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -n 1 || true)
    [ -n "$d" ] && [ -x "$d/pg_ctl" ] || return 1
    echo "$d"
}

as_server_user() {
    if [ "$(id -u)" = 0 ]; then
        runuser -u postgres -- "$@"
    else
        "$@"
    fi
}

cmd_install() {
    if bindir >/dev/null; then
        return 0
    fi
    [ "$(id -u)" = 0 ] || die "PostgreSQL server binaries missing and not root: install the 'postgresql' package"
    # No cluster of the package's own (it would listen on 5432): ours are created by `start`.
    mkdir -p /etc/postgresql-common
    if ! grep -qs '^create_main_cluster *= *false' /etc/postgresql-common/createcluster.conf; then
        echo 'create_main_cluster = false' >> /etc/postgresql-common/createcluster.conf
    fi
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq >/dev/null
    apt-get install -y -qq --no-install-recommends postgresql >/dev/null
    bindir >/dev/null || die "installed the postgresql package but found no server binaries"
}

cmd_start() {
    local dir=${1:?DIR} port=${2:?PORT} bin
    bin=$(bindir) || die "no PostgreSQL server binaries (run: $0 install)"
    mkdir -p "$dir"
    if [ "$(id -u)" = 0 ]; then
        chown postgres: "$dir"
    fi
    chmod 700 "$dir"
    if [ ! -f "$dir/data/PG_VERSION" ]; then
        as_server_user "$bin/initdb" -D "$dir/data" -U postgres -A trust -E UTF8 --no-sync \
            >"$dir/initdb.log" 2>&1 || { cat "$dir/initdb.log" >&2; die "initdb failed"; }
    fi
    as_server_user "$bin/pg_ctl" -D "$dir/data" -l "$dir/server.log" -w -t 60 \
        -o "-p $port -k $dir -c listen_addresses=127.0.0.1 -c max_connections=300" start \
        >/dev/null || { tail -n 20 "$dir/server.log" >&2; die "the server did not start"; }
    local psql=("$bin/psql" -X -q -h 127.0.0.1 -p "$port" -U postgres -d postgres -v ON_ERROR_STOP=1)
    if [ -z "$("${psql[@]}" -tAc "SELECT 1 FROM pg_database WHERE datname = 'deviation_test'")" ]; then
        "${psql[@]}" -c "CREATE DATABASE deviation_test" >/dev/null
    fi
    echo "postgresql+psycopg://postgres@127.0.0.1:$port/deviation_test"
}

cmd_stop() {
    local dir=${1:?DIR} mode=${2:-fast} bin
    bin=$(bindir) || return 0
    [ -f "$dir/data/postmaster.pid" ] || return 0
    as_server_user "$bin/pg_ctl" -D "$dir/data" -m "$mode" -w -t 60 stop >/dev/null
}

case "${1:-}" in
    install) cmd_install ;;
    start) shift; cmd_start "$@" ;;
    stop) shift; cmd_stop "$@" ;;
    *) die "usage: $0 install | start DIR PORT | stop DIR [MODE]" ;;
esac
