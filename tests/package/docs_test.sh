#!/usr/bin/env bash
# package.docs: the built programs against what ships beside them.
# - --version of junco, juncod and junco-sim prints the CMake project version
#   (given by CMake; the programs get it from the generated junco/version.hpp).
# - Each man page (tools/man) names every option its program's --help lists,
#   and junco.1 every command, calculator and plot kind.
# - The bash completion (tools/completion/junco.bash), run in bash against the
#   built junco, offers the commands, options and values.
# Usage: docs_test.sh SOURCE_DIR BIN_DIR PROJECT_VERSION
set -uo pipefail
src=$1 bin=$2 version=$3
failures=0
fail() { echo "FAIL: $*"; failures=$((failures + 1)); }

for prog in junco juncod junco-sim; do
  out=$("$bin/$prog" --version) || fail "$prog --version exited $?"
  [ "$out" = "$prog $version" ] || fail "$prog --version printed '$out', expected '$prog $version'"
done

# Man source with roff's \- turned into -, so options read as on the terminal.
man_text() { sed 's/\\-/-/g' "$src/tools/man/$1"; }
options_of() { "$@" --help 2>/dev/null | grep -oE -- '--[a-z][a-z0-9-]*' | sort -u; }
check_options() {  # PAGE HELP-COMMAND...
  local page=$1; shift
  local text; text=$(man_text "$page")
  local n=0
  for opt in $(options_of "$@"); do
    n=$((n + 1))
    grep -qE -- "${opt}([^a-z0-9-]|\$)" <<<"$text" || fail "$page does not mention $opt (from: ${*#"$bin"/} --help)"
  done
  [ "$n" -gt 0 ] || fail "no options found in: $* --help"
}
check_options juncod.8 "$bin/juncod"
check_options junco-sim.1 "$bin/junco-sim"
junco_man=$(man_text junco.1)
commands=$("$bin/junco" --help | awk '/^commands:/ { on = 1; next } on && /^  [a-z]/ { print $1 }')
[ "$(wc -w <<<"$commands")" -ge 10 ] || fail "junco --help lists too few commands: $commands"
for c in $commands; do
  grep -qE "^\.(B|BR) \"?$c( |\")" <<<"$junco_man" || fail "junco.1 has no entry for command $c"
  check_options junco.1 "$bin/junco" "$c"
done
calculators=$("$bin/junco" design --help | awk '/^calculators/ { on = 1; next } on && /^  [a-z]/ { print $1 } /^$/ { on = 0 }')
[ "$(wc -w <<<"$calculators")" -ge 5 ] || fail "junco design --help lists too few calculators"
for c in $calculators; do
  grep -qE "^\.B $c\$" <<<"$junco_man" || fail "junco.1 has no entry for calculator $c"
  check_options junco.1 "$bin/junco" design "$c"
done
kinds=$("$bin/junco" plot --help | sed -n 's/^\(usage:\)\{0,1\} *junco plot \([a-z]*\) .*/\2/p')
for k in $kinds; do grep -qE "^\.B $k\$" <<<"$junco_man" || fail "junco.1 does not describe plot $k"; done

# Every page renders without groff warnings.
for page in junco.1 junco-sim.1 juncod.8; do
  warnings=$(LC_ALL=C.UTF-8 MANWIDTH=80 man --warnings -l "$src/tools/man/$page" 2>&1 >/dev/null)
  [ -z "$warnings" ] || fail "$page: $warnings"
done

# The completion, as bash would call it on TAB (COMP_WORDS / COMP_CWORD).
complete_line() {  # WORDS... → the candidates, one per line
  bash -c '
    source "$1"; shift
    COMP_WORDS=("$@"); COMP_CWORD=$((${#COMP_WORDS[@]} - 1))
    _junco; printf "%s\n" "${COMPREPLY[@]}"' _ "$src/tools/completion/junco.bash" "$@"
}
expect() {  # "WORDS" WANTED... : each WANTED among the candidates
  local words=$1; shift
  local got; read -ra w <<<"$words"; [[ "$words" == *" " ]] && w+=("")
  got=$(complete_line "$bin/junco" "${w[@]:1}")
  for want in "$@"; do grep -qxF -- "$want" <<<"$got" || fail "completing 'junco ${words#junco }' offers no '$want' (got: $(tr '\n' ' ' <<<"$got"))"; done
}
# shellcheck disable=SC2086  # word lists on purpose
expect "junco " $commands --version
expect "junco fit --rob" --robust --robust-scale
expect "junco fit --robust " huber cauchy
expect "junco jobs --state " queued running paused "done" failed cancelled interrupted
expect "junco design " $calculators
expect "junco design loss --sw" --switch
expect "junco design loss --switch " series shunt
expect "junco design op --bias" --bias-resistor
expect "junco lab " lots parts stats
expect "junco lab parts --" --bench --db --json
expect "junco plot " $kinds
expect "junco lots --export " spice json
expect "junco show WR-03 --export " json spice csv iv-csv ac-csv off-csv
expect "junco submit --" --watch --socket
expect "junco bench --" --json --socket
got=$(cd "$src/tools/examples" && complete_line "$bin/junco" submit pl)
grep -qx plan.jsonc <<<"$got" || fail "completing 'junco submit pl' in tools/examples offers no plan.jsonc (got: $got)"

if [ "$failures" -gt 0 ]; then echo "$failures failure(s)"; exit 1; fi
echo "package.docs: versions, man pages ($(wc -w <<<"$commands") commands, $(wc -w <<<"$calculators") calculators) and completion OK"
