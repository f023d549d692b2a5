# Sourced by .ci/test and bench/run: make sure PostgreSQL and Redis answer on loopback,
# starting the machine's own servers when they are installed but stopped.
wait_for() { # name, command...
  local name="$1"; shift
  for _ in $(seq 1 30); do "$@" >/dev/null 2>&1 && return 0; sleep 1; done
  return 1
}

ensure_postgres() {
  if pg_isready -h 127.0.0.1 -p 5432 >/dev/null 2>&1; then return 0; fi
  if command -v pg_ctlcluster >/dev/null 2>&1 && [ -d /etc/postgresql ]; then
    echo "services: starting PostgreSQL"
    pg_ctlcluster --skip-systemctl-redirect "$(ls /etc/postgresql | head -1)" main start || true
    wait_for postgres pg_isready -h 127.0.0.1 -p 5432 && return 0
  fi
  echo "ERROR: PostgreSQL is not reachable at 127.0.0.1:5432 (tried DATABASE_URL=$DATABASE_URL)." >&2
  echo "       Install it (apt-get install -y postgresql) or start it:" >&2
  echo "       pg_ctlcluster --skip-systemctl-redirect \$(ls /etc/postgresql) main start" >&2
  return 1
}

ensure_redis() {
  if redis-cli -h 127.0.0.1 -p 6379 ping >/dev/null 2>&1; then return 0; fi
  if command -v redis-server >/dev/null 2>&1; then
    echo "services: starting Redis"
    redis-server --daemonize yes --bind 127.0.0.1 --port 6379 --save "" --appendonly no
    wait_for redis redis-cli -h 127.0.0.1 -p 6379 ping && return 0
  fi
  echo "ERROR: Redis is not reachable at 127.0.0.1:6379 (REDIS_URL=$REDIS_URL)." >&2
  echo "       Install it (apt-get install -y redis-server) or start it:" >&2
  echo "       redis-server --daemonize yes --bind 127.0.0.1 --port 6379 --save '' --appendonly no" >&2
  return 1
}

ensure_browser() {
  # Debian packages the tests call: chromium (browser tests), pdftotext (PDF contents),
  # zbarimg (reads the traveller's QR code back).
  local missing=""
  command -v chromium >/dev/null 2>&1 || missing="$missing chromium"
  command -v pdftotext >/dev/null 2>&1 || missing="$missing poppler-utils"
  command -v zbarimg >/dev/null 2>&1 || missing="$missing zbar-tools"
  if [ -z "$missing" ]; then return 0; fi
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
    echo "services: installing Debian packages for the tests:$missing"
    apt-get update -qq >/dev/null && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq $missing >/dev/null
  fi
  for tool in chromium pdftotext zbarimg; do
    command -v "$tool" >/dev/null 2>&1 || {
      echo "ERROR: the tests need $tool (apt-get install -y chromium poppler-utils zbar-tools)." >&2
      return 1
    }
  done
}
