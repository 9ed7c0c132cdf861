#!/bin/sh
# TLS for the compose cluster (docker/compose.yaml): one self-signed certificate that is its
# own CA, used by the scheduler, the workers and the driver alike (the arrangement of dask's
# Security.temporary), and a dask configuration for a driver on the host.
#   docker/make-tls.sh [DIR]        (default: docker/tls; nothing is overwritten)
# Every connection then needs a certificate signed by this one: dask checks both ends.
set -eu
dir=${1:-$(dirname "$0")/tls}
if [ -e "$dir/key.pem" ]; then echo "$dir/key.pem exists; remove $dir to make new ones" >&2; exit 1; fi
mkdir -p "$dir"
openssl req -x509 -newkey ec -pkeyopt ec_paramgen_curve:prime256v1 -nodes -days 365 \
    -subj /CN=orderless-cluster -keyout "$dir/key.pem" -out "$dir/cert.pem" 2>/dev/null
chmod 600 "$dir/key.pem"
abs=$(cd "$dir" && pwd)
cat > "$abs/dask.yaml" <<YAML
# A driver on the host: DASK_CONFIG=$abs orderless run ... --scheduler tls://127.0.0.1:8786
distributed:
  comm:
    require-encryption: true
    tls:
      ca-file: "$abs/cert.pem"
      client: {cert: "$abs/cert.pem", key: "$abs/key.pem"}
YAML
echo "wrote $abs/cert.pem, key.pem, dask.yaml"
