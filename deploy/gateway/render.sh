#!/bin/sh
# Render the gateway template for a host without Docker:
#   deploy/gateway/render.sh LISTEN REPLICA [REPLICA ...] > /srv/gateway/nginx.conf
#   deploy/gateway/render.sh 8080 127.0.0.1:8001 127.0.0.1:8002 127.0.0.1:8003 > ...
# then: nginx -p /srv/gateway/ -c /srv/gateway/nginx.conf -e stderr
# Fills ${BANDWISE_GATEWAY_LISTEN} and repeats each non-comment line holding
# ${BANDWISE_REPLICA} once per replica (see the header of nginx.conf).
set -eu
if [ "$#" -lt 2 ]; then
    echo "usage: $0 LISTEN REPLICA [REPLICA ...]" >&2
    exit 2
fi
listen=$1
shift
template=$(dirname "$0")/nginx.conf
awk -v listen="$listen" -v replicas="$*" '
/^[[:space:]]*#/ { print; next }
/\$\{BANDWISE_REPLICA\}/ {
    n = split(replicas, r, " ")
    for (i = 1; i <= n; i++) { line = $0; sub(/\$\{BANDWISE_REPLICA\}/, r[i], line); print line }
    next
}
{ gsub(/\$\{BANDWISE_GATEWAY_LISTEN\}/, listen); print }
' "$template"
