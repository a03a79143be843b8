#!/bin/sh
# Container start: bring the schema to the newest migration, optionally load the demo,
# then serve. Extra arguments go to `lampkeeper serve`.
set -eu

lampkeeper migrate

if [ "${LAMPKEEPER_DEMO:-0}" = "1" ]; then
    lampkeeper demo load --if-empty
    exec lampkeeper serve --host 0.0.0.0 --print-demo-key "$@"
fi

exec lampkeeper serve --host 0.0.0.0 "$@"
