#!/usr/bin/env bash
# Run a command with a throwaway PostgreSQL server on 127.0.0.1.
#
# Creates a cluster in a temporary folder, starts it on a free port, exports
# PANELWRIGHT_TEST_PG_URL (a superuser URL to the maintenance database; the tests create
# and drop their own database), runs the command, then stops the server and deletes the
# folder whatever the command's outcome.  The server runs as the `postgres` user when
# started by root (PostgreSQL refuses to run as root).
set -euo pipefail

PGBIN=$(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V | tail -1)
if [ -z "${PGBIN}" ]; then
  echo "with-postgres: no PostgreSQL server found (run scripts/system-deps.sh)" >&2
  exit 1
fi
PGDIR=$(mktemp -d /tmp/panelwright-pg.XXXXXX)
PORT=$(python3 -c 'import socket; s=socket.socket(); s.bind(("127.0.0.1", 0)); print(s.getsockname()[1]); s.close()')
RUNAS=()
if [ "$(id -u)" -eq 0 ]; then
  chown postgres "${PGDIR}"
  RUNAS=(runuser -u postgres --)
fi

cleanup() {
  "${RUNAS[@]}" "${PGBIN}/pg_ctl" -D "${PGDIR}/data" -m immediate stop >/dev/null 2>&1 || true
  rm -rf "${PGDIR}"
}
trap cleanup EXIT

"${RUNAS[@]}" "${PGBIN}/initdb" -D "${PGDIR}/data" -U panelwright --auth=trust -E UTF8 >/dev/null
"${RUNAS[@]}" "${PGBIN}/pg_ctl" -D "${PGDIR}/data" -w -t 60 -l "${PGDIR}/server.log" \
  -o "-c listen_addresses=127.0.0.1 -p ${PORT} -k ${PGDIR} -c fsync=off" start >/dev/null

export PANELWRIGHT_TEST_PG_URL="postgresql+psycopg://panelwright@127.0.0.1:${PORT}/postgres"
echo "with-postgres: PostgreSQL $("${PGBIN}/postgres" --version | awk '{print $3}') on 127.0.0.1:${PORT}" >&2
set +e
"$@"
status=$?
set -e
exit ${status}
