# Throw-away PostgreSQL servers for the tests of the PostgreSQL store and of
# replicas. Source it (`.ci/test` does):
#
#   source .ci/postgres.sh
#
# It installs the PostgreSQL server from the Debian packages when no server
# binaries are found (as root, or with password-less sudo), initialises two
# clusters in a new temporary directory, starts them on 127.0.0.1 at free
# ports, and exports:
#
#   MIXD_TEST_POSTGRES          URL of server 1: the store suite and the
#                               replica tests (one schema per test)
#   MIXD_TEST_POSTGRES_RESTART  URL of server 2, which one end-to-end test
#                               stops and starts again
#   MIXD_TEST_PG_CTL            the command that runs pg_ctl as the servers'
#                               owner (split on spaces)
#   MIXD_TEST_PG_DATA           the data directory of server 2
#
# The servers refuse to run as root, so when the script runs as root they
# run as the system user "postgres" (created by the Debian package; created
# here when missing) through runuser. An EXIT trap stops both servers and
# removes the directory; if you replace the trap, call mixd_pg_stop.
# Nothing is written outside the temporary directory (apart from the
# package installation), and the servers accept connections only on
# 127.0.0.1 and a socket in that directory, without password (trust).

mixd_pg_log() { printf 'postgres.sh: %s\n' "$*" >&2; }

# mixd_pg_bindir prints the directory holding postgres, initdb and pg_ctl.
mixd_pg_bindir() {
  local d
  for d in $(ls -d /usr/lib/postgresql/*/bin 2>/dev/null | sort -V -r); do
    if [ -x "$d/postgres" ] && [ -x "$d/initdb" ] && [ -x "$d/pg_ctl" ]; then
      echo "$d"
      return 0
    fi
  done
  if command -v pg_ctl >/dev/null 2>&1; then
    d=$(dirname "$(readlink -f "$(command -v pg_ctl)")")
    if [ -x "$d/postgres" ] && [ -x "$d/initdb" ]; then
      echo "$d"
      return 0
    fi
  fi
  return 1
}

mixd_pg_install() {
  local sudo=""
  if [ "$(id -u)" -ne 0 ]; then
    if command -v sudo >/dev/null 2>&1 && sudo -n true 2>/dev/null; then
      sudo="sudo -n"
    else
      mixd_pg_log "no PostgreSQL server found and not root: install the Debian package 'postgresql' (apt-get install postgresql) and run again"
      return 1
    fi
  fi
  mixd_pg_log "installing the PostgreSQL server from the Debian packages"
  # Do not let the package create and start a default cluster on port 5432.
  if [ ! -e /etc/postgresql-common/createcluster.conf ]; then
    $sudo mkdir -p /etc/postgresql-common
    echo "create_main_cluster = false" | $sudo tee /etc/postgresql-common/createcluster.conf >/dev/null
  fi
  $sudo env DEBIAN_FRONTEND=noninteractive apt-get update -q
  $sudo env DEBIAN_FRONTEND=noninteractive apt-get install -y -q --no-install-recommends postgresql
}

# mixd_pg_start_one DIR: initialise a cluster in DIR and start it on a free
# port of 127.0.0.1; prints the port.
mixd_pg_start_one() {
  local dir=$1 port attempt
  $mixd_pg_as "$mixd_pg_bin/initdb" -D "$dir" -U postgres --auth=trust --no-locale -E UTF8 >"$dir.initdb.log" 2>&1 || {
    cat "$dir.initdb.log" >&2
    return 1
  }
  cat >>"$dir/postgresql.conf" <<EOF
# throw-away test server (.ci/postgres.sh)
listen_addresses = '127.0.0.1'
unix_socket_directories = '$mixd_pg_root'
max_connections = 200
fsync = off
synchronous_commit = off
full_page_writes = off
EOF
  for attempt in 1 2 3 4 5 6 7 8 9 10; do
    port=$((20000 + RANDOM % 40000))
    if (exec 3<>"/dev/tcp/127.0.0.1/$port") 2>/dev/null; then
      continue # something listens there
    fi
    echo "port = $port" >>"$dir/postgresql.conf"
    if $mixd_pg_as "$mixd_pg_bin/pg_ctl" -D "$dir" -l "$dir/server.log" -w -t 60 start >/dev/null; then
      echo "$port"
      return 0
    fi
    if ! grep -q "could not bind\|could not create listen socket\|Address already in use" "$dir/server.log" 2>/dev/null; then
      cat "$dir/server.log" >&2 || true
      return 1
    fi
    mixd_pg_log "port $port is taken; trying another"
  done
  mixd_pg_log "no free port found for PostgreSQL"
  return 1
}

mixd_pg_stop() {
  local d
  for d in "$mixd_pg_root"/server1 "$mixd_pg_root"/server2; do
    if [ -f "$d/postmaster.pid" ]; then
      $mixd_pg_as "$mixd_pg_bin/pg_ctl" -D "$d" -m fast -w -t 30 stop >/dev/null 2>&1 ||
        $mixd_pg_as "$mixd_pg_bin/pg_ctl" -D "$d" -m immediate -w stop >/dev/null 2>&1 || true
    fi
  done
  if [ -n "${mixd_pg_root:-}" ]; then
    rm -rf "$mixd_pg_root"
  fi
}

mixd_pg_main() {
  mixd_pg_bin=$(mixd_pg_bindir) || {
    mixd_pg_install || return 1
    mixd_pg_bin=$(mixd_pg_bindir) || {
      mixd_pg_log "PostgreSQL server binaries not found after installing"
      return 1
    }
  }
  local owner=""
  mixd_pg_as=""
  if [ "$(id -u)" -eq 0 ]; then
    owner=postgres
    if ! id -u "$owner" >/dev/null 2>&1; then
      useradd --system --user-group --no-create-home --home-dir /nonexistent --shell /usr/sbin/nologin "$owner"
    fi
    command -v runuser >/dev/null 2>&1 || {
      mixd_pg_log "runuser (util-linux) is needed to run PostgreSQL as $owner"
      return 1
    }
    mixd_pg_as="runuser -u $owner --"
  fi
  # /tmp, not $TMPDIR: the server's user must be able to reach it.
  mixd_pg_root=$(mktemp -d /tmp/mixd-pg.XXXXXX)
  trap mixd_pg_stop EXIT
  if [ -n "$owner" ]; then
    chown "$owner" "$mixd_pg_root"
  fi
  chmod 0700 "$mixd_pg_root"
  local d port1 port2
  for d in server1 server2; do
    mkdir "$mixd_pg_root/$d"
    if [ -n "$owner" ]; then chown "$owner" "$mixd_pg_root/$d"; fi
    chmod 0700 "$mixd_pg_root/$d"
  done
  port1=$(mixd_pg_start_one "$mixd_pg_root/server1") || return 1
  port2=$(mixd_pg_start_one "$mixd_pg_root/server2") || return 1
  export MIXD_TEST_POSTGRES="postgres://postgres@127.0.0.1:$port1/postgres?sslmode=disable"
  export MIXD_TEST_POSTGRES_RESTART="postgres://postgres@127.0.0.1:$port2/postgres?sslmode=disable"
  export MIXD_TEST_PG_CTL="${mixd_pg_as:+$mixd_pg_as }$mixd_pg_bin/pg_ctl"
  export MIXD_TEST_PG_DATA="$mixd_pg_root/server2"
  mixd_pg_log "PostgreSQL $("$mixd_pg_bin/postgres" --version | awk '{print $3}') on 127.0.0.1:$port1 and 127.0.0.1:$port2 (data in $mixd_pg_root)"
}

mixd_pg_main
