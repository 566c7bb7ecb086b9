#!/usr/bin/env bash
# testenv.sh: run a command beside real Mosquitto and InfluxDB servers.
#
#   scripts/testenv.sh go test -count=1 ./...
#
# What it does, in order:
#   1. Installs Mosquitto from Debian's packages when no mosquitto binary is
#      found (apt-get update once, then apt-get install -y mosquitto; needs
#      root).
#   2. Builds InfluxDB 1.8 OSS (influxd) from the Go module proxy into
#      <repo>/.testenv/bin when it is not there yet (about a minute; the
#      folder is gitignored and reused by later runs).
#   3. Starts both servers on free loopback ports, with their data in a
#      temporary folder, and waits until both answer.
#   4. Creates the test database, exports the PLUMBLINE_TEST_* variables
#      below and runs the command.
#   5. Stops both servers and removes the temporary folder (trap EXIT), and
#      exits with the command's exit code.
#
# Variables exported to the command (internal/testenv reads them):
#   PLUMBLINE_TEST_MQTT_URL      tcp://127.0.0.1:PORT
#   PLUMBLINE_TEST_INFLUX_URL    http://127.0.0.1:PORT
#   PLUMBLINE_TEST_INFLUX_TOKEN  empty (auth is off) or user:password
#   PLUMBLINE_TEST_INFLUX_ORG    "-" (InfluxDB 1.8 ignores the org)
#   PLUMBLINE_TEST_INFLUX_DB     database name; the bucket is DB/autogen
#   PLUMBLINE_MOSQUITTO_BIN      path of mosquitto, for tests that run their own
#   PLUMBLINE_INFLUXD_BIN        path of influxd, for tests that run their own
#   PLUMBLINE_CHROMIUM_BIN       path of chromium, for the operator page test (daemon/web)
#
# Overrides: PLUMBLINE_MOSQUITTO_BIN and PLUMBLINE_INFLUXD_BIN, when set to an
# existing binary, are used instead of installing. TESTENV_KEEP=1 keeps the
# temporary folder (server logs) after the run.
set -euo pipefail

repo=$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)
cache="$repo/.testenv"
influx_version=v1.8.3

say() { printf 'testenv: %s\n' "$*" >&2; }
die() { say "$*"; exit 2; }

[ $# -gt 0 ] || die "usage: scripts/testenv.sh COMMAND [ARG...]"

mkdir -p "$cache/bin"

# Only one run at a time installs or builds; others wait for it.
exec 9>"$cache/install.lock"
flock 9

# --- 1. Mosquitto -----------------------------------------------------------
find_mosquitto() {
  if [ -n "${PLUMBLINE_MOSQUITTO_BIN:-}" ] && [ -x "$PLUMBLINE_MOSQUITTO_BIN" ]; then
    echo "$PLUMBLINE_MOSQUITTO_BIN"; return 0
  fi
  local p
  for p in "$(command -v mosquitto 2>/dev/null || true)" /usr/sbin/mosquitto /usr/local/sbin/mosquitto; do
    if [ -n "$p" ] && [ -x "$p" ]; then echo "$p"; return 0; fi
  done
  return 1
}
if ! mosquitto_bin=$(find_mosquitto); then
  [ "$(id -u)" -eq 0 ] || die "mosquitto is not installed and this is not root: run 'apt-get install -y mosquitto' as root"
  say "installing mosquitto from Debian's packages"
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq >&2 || die "apt-get update failed"
  apt-get install -y -qq mosquitto >&2 || die "apt-get install mosquitto failed"
  mosquitto_bin=$(find_mosquitto) || die "mosquitto still not found after installing"
fi

# --- 1b. Chromium (the operator page's browser test, daemon/web) ----------
find_chromium() {
  if [ -n "${PLUMBLINE_CHROMIUM_BIN:-}" ] && [ -x "$PLUMBLINE_CHROMIUM_BIN" ]; then
    echo "$PLUMBLINE_CHROMIUM_BIN"; return 0
  fi
  if [ -x /usr/bin/chromium ]; then echo /usr/bin/chromium; return 0; fi
  return 1
}
if ! chromium_bin=$(find_chromium); then
  [ "$(id -u)" -eq 0 ] || die "chromium is not installed and this is not root: run 'apt-get install -y chromium' as root"
  say "installing chromium from Debian's packages"
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq >&2 || die "apt-get update failed"
  apt-get install -y -qq chromium >&2 || die "apt-get install chromium failed"
  chromium_bin=$(find_chromium) || die "chromium still not found after installing"
fi
export PLUMBLINE_CHROMIUM_BIN="$chromium_bin"

# --- 2. InfluxDB 1.8 OSS --------------------------------------------------
influxd_bin=""
if [ -n "${PLUMBLINE_INFLUXD_BIN:-}" ] && [ -x "$PLUMBLINE_INFLUXD_BIN" ]; then
  influxd_bin=$PLUMBLINE_INFLUXD_BIN
elif [ -x "$cache/bin/influxd" ]; then
  influxd_bin=$cache/bin/influxd
else
  say "building influxd $influx_version from the Go module proxy (about a minute, once)"
  # Run outside the repository so our go.mod and GOFLAGS do not interfere.
  (cd "$cache" && GOBIN="$cache/bin" GOFLAGS= GOWORK=off CGO_ENABLED=0 \
    go install "github.com/influxdata/influxdb/cmd/influxd@$influx_version") >&2 \
    || die "building influxd failed"
  influxd_bin=$cache/bin/influxd
fi
flock -u 9
exec 9>&-

# --- 3. Start the servers -------------------------------------------------
tmp=$(mktemp -d "${TMPDIR:-/tmp}/plumbline-testenv.XXXXXX")
mosq_pid=""
influx_pid=""
cleanup() {
  local rc=$?
  for pid in $mosq_pid $influx_pid; do
    kill "$pid" 2>/dev/null || true
  done
  for pid in $mosq_pid $influx_pid; do
    # Give each server five seconds to stop, then insist.
    for _ in $(seq 50); do kill -0 "$pid" 2>/dev/null || break; sleep 0.1; done
    kill -9 "$pid" 2>/dev/null || true
    wait "$pid" 2>/dev/null || true
  done
  if [ "${TESTENV_KEEP:-0}" = 1 ]; then say "kept $tmp"; else rm -rf "$tmp"; fi
  exit "$rc"
}
trap cleanup EXIT
trap 'exit 130' INT
trap 'exit 143' TERM

# port_free PORT: nothing listens on 127.0.0.1:PORT.
port_free() { ! (exec 3<>"/dev/tcp/127.0.0.1/$1") 2>/dev/null; }
taken=" "
free_port() {
  local p
  for _ in $(seq 200); do
    p=$((20000 + RANDOM % 40000))
    case "$taken" in *" $p "*) continue ;; esac
    if port_free "$p"; then taken="$taken$p "; echo "$p"; return 0; fi
  done
  die "no free loopback port found"
}
mqtt_port=$(free_port); taken="$taken$mqtt_port "
http_port=$(free_port); taken="$taken$http_port "
rpc_port=$(free_port); taken="$taken$rpc_port "

mkdir -p "$tmp/mosquitto" "$tmp/influx"
cat >"$tmp/mosquitto/mosquitto.conf" <<EOF
# Test broker: durable sessions, no silent queue limit, high in-flight window.
user $(id -un)
persistence true
persistence_location $tmp/mosquitto/
autosave_interval 1
max_queued_messages 0
max_inflight_messages 1000
listener $mqtt_port 127.0.0.1
allow_anonymous true
log_dest file $tmp/mosquitto/mosquitto.log
log_type error
log_type warning
EOF
"$mosquitto_bin" -c "$tmp/mosquitto/mosquitto.conf" >"$tmp/mosquitto/stdout.log" 2>&1 &
mosq_pid=$!

cat >"$tmp/influx/influxdb.conf" <<EOF
reporting-disabled = true
bind-address = "127.0.0.1:$rpc_port"
[meta]
  dir = "$tmp/influx/meta"
  logging-enabled = false
[data]
  dir = "$tmp/influx/data"
  wal-dir = "$tmp/influx/wal"
  query-log-enabled = false
  trace-logging-enabled = false
[coordinator]
  log-queries-after = "0s"
[monitor]
  store-enabled = false
[http]
  enabled = true
  bind-address = "127.0.0.1:$http_port"
  auth-enabled = false
  log-enabled = false
  suppress-write-log = true
  flux-enabled = true
  flux-log-enabled = false
  pprof-enabled = false
[logging]
  level = "warn"
  suppress-logo = true
[continuous_queries]
  enabled = false
EOF
"$influxd_bin" run -config "$tmp/influx/influxdb.conf" >"$tmp/influx/influxd.log" 2>&1 &
influx_pid=$!

# http_status METHOD PATH [FORM-BODY]: HTTP status code from InfluxDB, or
# nothing when it does not answer. Plain bash, so no curl is needed.
http_status() {
  local method=$1 path=$2 body=${3:-} line
  { exec 3<>"/dev/tcp/127.0.0.1/$http_port"; } 2>/dev/null || return 1
  printf '%s %s HTTP/1.0\r\nHost: 127.0.0.1\r\nContent-Type: application/x-www-form-urlencoded\r\nContent-Length: %d\r\nConnection: close\r\n\r\n%s' \
    "$method" "$path" "${#body}" "$body" >&3
  IFS= read -r -t 5 line <&3 || { exec 3<&-; return 1; }
  exec 3<&-
  line=${line%$'\r'}
  echo "${line#* }" | cut -d' ' -f1
}

say "waiting for mosquitto on 127.0.0.1:$mqtt_port and influxd on 127.0.0.1:$http_port"
for i in $(seq 600); do
  kill -0 "$mosq_pid" 2>/dev/null || { cat "$tmp/mosquitto/"*.log >&2; die "mosquitto exited"; }
  if ! port_free "$mqtt_port"; then break; fi
  [ "$i" -lt 600 ] || die "mosquitto did not answer within 60 s"
  sleep 0.1
done
for i in $(seq 600); do
  kill -0 "$influx_pid" 2>/dev/null || { tail -50 "$tmp/influx/influxd.log" >&2; die "influxd exited"; }
  if [ "$(http_status GET /ping || true)" = 204 ]; then break; fi
  [ "$i" -lt 600 ] || { tail -50 "$tmp/influx/influxd.log" >&2; die "influxd did not answer within 60 s"; }
  sleep 0.1
done

# --- 4. Database, environment, command ------------------------------------
db=plumbline_test
status=$(http_status POST /query "q=CREATE%20DATABASE%20$db" || true)
[ "$status" = 200 ] || die "CREATE DATABASE $db answered '$status'"

export PLUMBLINE_TEST_MQTT_URL="tcp://127.0.0.1:$mqtt_port"
export PLUMBLINE_TEST_INFLUX_URL="http://127.0.0.1:$http_port"
export PLUMBLINE_TEST_INFLUX_TOKEN=""
export PLUMBLINE_TEST_INFLUX_ORG="-"
export PLUMBLINE_TEST_INFLUX_DB="$db"
export PLUMBLINE_MOSQUITTO_BIN="$mosquitto_bin"
export PLUMBLINE_INFLUXD_BIN="$influxd_bin"
say "MQTT $PLUMBLINE_TEST_MQTT_URL, InfluxDB $PLUMBLINE_TEST_INFLUX_URL (db $db)"

set +e
"$@"
rc=$?
set -e
exit "$rc"
