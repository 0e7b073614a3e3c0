#!/bin/sh
# Refresh docker/constraints.txt, the exact versions the image installs: resolve the runtime
# dependencies with the batch extra (no test extras) in a throwaway Python 3.11 environment and pin every one.
#   sh docker/lock.sh            then rebuild the image, run the tests, commit both
set -eu
cd "$(dirname "$0")/.."
python="${PYTHON:-python3.11}"
venv="$(mktemp -d)"
trap 'rm -rf "$venv"' EXIT
"$python" -m venv "$venv"
"$venv/bin/pip" install --quiet --disable-pip-version-check ".[batch]"
{
  echo "# The image's pinned runtime dependencies (docker/Dockerfile installs with -c)."
  echo "# Refresh with: sh docker/lock.sh   (resolved on $("$venv/bin/python" -V 2>&1), $(uname -m))"
  "$venv/bin/pip" freeze --disable-pip-version-check --all --exclude windvane \
    --exclude pip --exclude setuptools --exclude wheel
} > docker/constraints.txt.new
mv docker/constraints.txt.new docker/constraints.txt
echo "wrote docker/constraints.txt"
