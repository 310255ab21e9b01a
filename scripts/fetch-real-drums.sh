#!/usr/bin/env bash
# Fetches real drum samples for scripts/real-drums.sh: four kits from Debian's
# package hydrogen-drumkits (sample libraries recorded from real drums; see
# /work/shared/corpus/README.md or the project's corpus notes).
#
#   Millo-Drums_v.1   toms, snares, kick (FLAC)     GPL-2, Emiliano Grilli
#   VariBreaks        toms, snares, kicks (FLAC)    GPL-2+, Artemiy Pavlov
#   circAfrique v4    djembe and dunun heads (WAV)  CC-BY-SA-3.0, Jim Harney
#   Gimme A Hand 1.0  bongos (WAV)                  GPL-2, Glen MacArthur
#
# The samples are not committed: they are fetched into DIR (default
# real-drums/, which .gitignore leaves out), with the package's copyright
# file (every kit's licence) copied beside them as DIR/copyright.
#
# Usage: bash scripts/fetch-real-drums.sh [DIR]
# Needs: apt-get (Debian's package index; run `apt-get update` once first)
# and dpkg. About 143 MB is downloaded; the four kits take about 12 MB.
set -euo pipefail

dest=${1:-real-drums}
kits=("Millo-Drums_v.1" "VariBreaks" "circAfrique v4" "Gimme A Hand 1.0")

work=$(mktemp -d)
chmod 755 "$work" # so that apt-get can download as _apt, sandboxed
trap 'rm -rf "$work"' EXIT

# apt-get download writes into the current folder; as root it warns that the
# folder is not readable by _apt and downloads unsandboxed, which is fine.
(cd "$work" && apt-get download hydrogen-drumkits >/dev/null)
deb=$(ls "$work"/hydrogen-drumkits_*.deb)
dpkg -x "$deb" "$work/x"
src="$work/x/usr/share/hydrogen/data/drumkits"

mkdir -p "$dest"
for k in "${kits[@]}"; do
    if [ ! -d "$src/$k" ]; then
        echo "fetch-real-drums: kit '$k' is not in $(basename "$deb")" >&2
        exit 1
    fi
    rm -rf "${dest:?}/$k"
    cp -r "$src/$k" "$dest/$k"
done
cp "$work/x/usr/share/doc/hydrogen-drumkits/copyright" "$dest/copyright"
printf '%s\n' "Fetched from Debian's $(basename "$deb") on $(date -u +%Y-%m-%d)." \
    "Kits: ${kits[*]}. Licences: see copyright (one stanza per kit)." >"$dest/SOURCE.txt"
echo "fetch-real-drums: ${#kits[@]} kits in $dest ($(find "$dest" -type f \( -name '*.wav' -o -name '*.flac' \) | wc -l) samples), licences in $dest/copyright"
