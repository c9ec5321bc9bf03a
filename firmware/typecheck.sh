#!/bin/sh
# Type-check the firmware with mypy against MicroPython stubs kept in a folder of their own.
#
#   firmware/typecheck.sh <venv python> <stubs dir> [module.py ...]
#   e.g. firmware/typecheck.sh .venv/bin/python .stubs        (every firmware module)
#
# The stubs folder is made once with:
#   <venv python> -m pip install --target <stubs dir> micropython-rp2-stubs
# It holds a MicroPython typeshed in <stubs dir>/stdlib (the folder is custom_typeshed_dir) and the
# port modules (machine, time, select...) at its top (used as mypy_path). The codec wire.py
# lives in the host package; it is checked here as the board sees it (a top-level module).
# Exit status: non-zero on any type error.
set -eu
if [ $# -lt 2 ]; then
    echo "usage: $0 <venv python> <stubs dir> [module.py ...]" >&2
    exit 2
fi
PY=$1
case $PY in
    */*) PY=$(cd "$(dirname "$PY")" && pwd)/$(basename "$PY") ;;
esac
STUBS=$(cd "$2" && pwd)
shift 2
HERE=$(cd "$(dirname "$0")" && pwd)
if [ ! -f "$STUBS/stdlib/VERSIONS" ]; then
    echo "$0: $STUBS has no stdlib/ (install micropython-rp2-stubs there)" >&2
    exit 2
fi
WORK=$(mktemp -d)
trap 'rm -rf "$WORK"' EXIT
cp "$HERE"/*.py "$WORK"/
cp "$HERE/../host/nullsteer/protocol/wire.py" "$WORK/wire.py"
cd "$WORK"
MYPYPATH="$STUBS" "$PY" -m mypy --config-file "$HERE/mypy.ini" \
    --custom-typeshed-dir "$STUBS" --cache-dir "$WORK/.mypy_cache" \
    ${@:-$(ls "$HERE"/*.py | xargs -n1 basename)}
