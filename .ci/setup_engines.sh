#!/usr/bin/env bash
# Install the system pieces the test engines (and the browser tests) need; safe to run again.
# Python packages come from the project's own setup; servers are started by tests/engines.py.
set -euo pipefail

PG_BIN=/usr/lib/postgresql/15/bin

if [ "$(id -u)" -ne 0 ]; then
    echo "setup_engines: not root, installing nothing" >&2
    exit 0
fi

# MariaDB server (stand-in for MySQL 8) when mariadbd is missing, and mariadb-client for
# mariadb-tzinfo-to-sql (named time zones for CONVERT_TZ).
if ! { command -v mariadbd >/dev/null 2>&1 || [ -x /usr/sbin/mariadbd ]; } \
        || ! command -v mariadb-tzinfo-to-sql >/dev/null 2>&1; then
    apt-get update
    DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends \
        mariadb-server-core mariadb-client-core mariadb-client tzdata
fi

# PostgreSQL 15 server binaries (normally present already).
if [ ! -x "$PG_BIN/initdb" ]; then
    apt-get update
    DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends postgresql-15
fi

# Headless Chromium for the report page tests (tests/browser.py), from Debian's packages.
if ! command -v chromium >/dev/null 2>&1; then
    apt-get update
    DEBIAN_FRONTEND=noninteractive apt-get install -y --no-install-recommends chromium
fi

# initdb refuses to run as root: the harness runs it as this unprivileged user.
if ! id -u postgres >/dev/null 2>&1; then
    useradd --system --user-group --no-create-home --shell /usr/sbin/nologin postgres
fi

command -v java >/dev/null 2>&1 || echo "setup_engines: warning: java missing (needed by Spark)" >&2
echo "setup_engines: ok"
