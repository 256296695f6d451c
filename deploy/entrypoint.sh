#!/bin/sh
# Container start: wait (up to CALCSVC_DB_WAIT_S) for a database server starting alongside, bring the schema
# up to date, seed only a database that holds no parts, then hand the process over to gunicorn (exec keeps its
# PID, so `docker stop` reaches it and it shuts down gracefully).
# Any failing step, a bad setting or an unreachable database included, stops the start with a one-line message
# and a non-zero exit.
set -eu

calcsvc db wait
calcsvc db upgrade
calcsvc db seed --if-empty
exec calcsvc serve
