# Sourced by .ci/run: a throwaway PostgreSQL cluster for the store tests,
# from Debian's postgresql package, run as the postgres user on a local port.
# start_postgres exports EIVFIT_TEST_DATABASE_URL; stop_postgres removes it all.

start_postgres() {
	local bin port
	# /usr/local/bin may hold links named initdb/pg_ctl: call Debian's own.
	bin=$(ls -d /usr/lib/postgresql/*/bin | sort -V | tail -n 1)
	port=${EIVFIT_PG_PORT:-54329}
	# The first free port from there (a connection that succeeds means taken).
	while (exec 3<>"/dev/tcp/127.0.0.1/$port") 2>/dev/null; do port=$((port + 1)); done
	PG_TMP=$(mktemp -d /tmp/eivfit-pg.XXXXXX)
	mkdir -p "$PG_TMP/sock"
	chown -R postgres:postgres "$PG_TMP"
	PG_BIN=$bin
	su postgres -s /bin/sh -c "'$bin/initdb' -D '$PG_TMP/data' -A trust -U postgres --no-sync >'$PG_TMP/initdb.log'" ||
		{ cat "$PG_TMP/initdb.log"; return 1; }
	su postgres -s /bin/sh -c "'$bin/pg_ctl' -D '$PG_TMP/data' -l '$PG_TMP/server.log' -w -t 60 start \
		-o \"-p $port -k $PG_TMP/sock -c listen_addresses=127.0.0.1 -c max_connections=200\"" >/dev/null ||
		{ cat "$PG_TMP/server.log"; return 1; }
	su postgres -s /bin/sh -c "'$bin/createdb' -h 127.0.0.1 -p $port -U postgres eivfit_test"
	export EIVFIT_TEST_DATABASE_URL="postgres://postgres@127.0.0.1:$port/eivfit_test?sslmode=disable"
}

stop_postgres() {
	[ -n "${PG_TMP:-}" ] || return 0
	su postgres -s /bin/sh -c "'$PG_BIN/pg_ctl' -D '$PG_TMP/data' -m immediate stop" >/dev/null 2>&1 || true
	rm -rf "$PG_TMP"
	PG_TMP=
}
