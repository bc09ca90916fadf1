#!/usr/bin/env bash
# Checks the layout rules of DEVELOPERS.md ("Layout"): which folder's code may
# include which. Run by ctest as layout.includes; prints every offending
# #include line (file:line: text) and exits 1 when there is one.
# Usage: tools/check_layout.sh [SOURCE_DIR]
set -u
root=${1:-$(dirname "$0")/..}
cd "$root" || exit 2
status=0

# folder | the folders its #include "..." lines may name (besides itself)
rules=(
  "units|"
  "fitting|units"
  "design|fitting units"
  "formats|fitting design units"
  "protocol|formats/json_limits.hpp"
)
for rule in "${rules[@]}"; do
  dir=${rule%%|*}
  allowed="$dir ${rule#*|}"
  pattern=$(printf '%s\n' $allowed | sed 's#[.]#[.]#g; s#^#^#' | paste -sd'|')
  while IFS= read -r hit; do
    inc=$(sed -E 's/.*#[[:space:]]*include[[:space:]]*"([^"]+)".*/\1/' <<<"${hit#*:*:}")
    [[ $inc == */* ]] || continue  # same-folder or system header
    if ! grep -Eq "$pattern(/|$)" <<<"$inc"; then
      echo "$hit   <- $dir/ may include only: $allowed" >&2
      status=1
    fi
  done < <(grep -nE '^[[:space:]]*#[[:space:]]*include[[:space:]]*"' "$dir"/*.cpp "$dir"/*.hpp 2>/dev/null)
done

# The junco CLI reaches juncod only through protocol/: no daemon/ or drivers/
# code in it, nor their libraries on its link line.
if hits=$(grep -nE '^[[:space:]]*#[[:space:]]*include[[:space:]]*"(daemon|drivers)/' tools/junco/*.cpp tools/junco/*.hpp); then
  echo "$hits   <- tools/junco may not include daemon/ or drivers/ (use protocol/)" >&2
  status=1
fi
if hits=$(grep -nE 'junco_(daemon|drivers)\b' tools/junco/CMakeLists.txt | grep -v '^[0-9]*:[[:space:]]*#'); then
  echo "tools/junco/CMakeLists.txt:$hits   <- junco may not link junco_daemon or junco_drivers" >&2
  status=1
fi
# The daemon's stored rows are typed (DEVELOPERS.md "Stored data is typed"):
# no JSON library in daemon/rows.hpp, no JSON member; JSON is made from rows
# only in daemon/api_json and formats/.
if hits=$(grep -nE 'nlohmann|\bJson\b' daemon/rows.hpp); then
  echo "daemon/rows.hpp:$hits   <- daemon/rows.hpp holds typed rows only (JSON in daemon/api_json, formats/)" >&2
  status=1
fi
[[ $status == 0 ]] && echo "layout: every #include follows the folder rules"
exit $status
