#!/usr/bin/env bash
# Builds the release binary, installs it, and registers the Jupyter kernel.
#
#   install/install.sh                 binary to ~/.local/bin, kernelspec for this user
#   install/install.sh --prefix DIR    binary to DIR/bin, kernelspec under DIR/share/jupyter
#
# Afterwards: `jupyter console --kernel headroom`, or pick "Headroom" in JupyterLab.
set -euo pipefail

usage() { sed -n '2,8p' "$0" | sed 's/^# \{0,1\}//'; }

prefix=""
while [ $# -gt 0 ]; do
    case "$1" in
        --prefix) prefix="${2:?--prefix needs a directory}"; shift 2 ;;
        --prefix=*) prefix="${1#--prefix=}"; shift ;;
        -h|--help) usage; exit 0 ;;
        *) echo "install.sh: unknown option $1" >&2; usage >&2; exit 2 ;;
    esac
done

cd "$(dirname "$0")/.."
command -v cargo >/dev/null || { echo "install.sh: cargo is needed (https://rustup.rs)" >&2; exit 1; }

echo "== building the release binary"
cargo build --release --locked -p headroom
target_dir="${CARGO_TARGET_DIR:-target}"

if [ -n "$prefix" ]; then
    bin_dir="$prefix/bin"
else
    bin_dir="$HOME/.local/bin"
fi
mkdir -p "$bin_dir"
# Copy beside, then rename: a kernel running from the old binary keeps working.
install -m 755 "$target_dir/release/headroom" "$bin_dir/.headroom.new"
mv -f "$bin_dir/.headroom.new" "$bin_dir/headroom"
echo "== installed $bin_dir/headroom"

echo "== registering the kernel"
if [ -n "$prefix" ]; then
    "$bin_dir/headroom" install --prefix "$prefix"
else
    "$bin_dir/headroom" install --user
fi

case ":$PATH:" in
    *":$bin_dir:"*) ;;
    *) echo "note: $bin_dir is not on your PATH; add it to run \`headroom\` from a shell." ;;
esac
