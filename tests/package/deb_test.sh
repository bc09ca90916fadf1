#!/usr/bin/env bash
# package.deb: builds the Debian package with CPack from this build tree,
# checks its control data, extracts it into a scratch root (dpkg-deb -x) and
# runs what it installed there:
#  1. control: Version is the project version; Depends names the Debian
#     package of every shared library the three programs need (found with
#     objdump and dpkg -S on this machine, not a list kept here); the config
#     is a conffile; maintainer scripts parse (sh -n).
#  2. files: programs, man pages, completion, docs, examples, dialects, unit,
#     sysusers.d and tmpfiles.d snippets, /etc/junco/bench.jsonc; the unit's
#     ExecStart/ExecStartPre name installed files, its User= is the sysusers user.
#  3. each installed program's --version is the project version.
#  4. systemd-sysusers --root and systemd-tmpfiles --root apply the snippets:
#     user and group junco, /run/junco and /var/lib/junco 0750 junco:junco.
#  5. as root (skipped otherwise, exit 77): in a private mount namespace with
#     the scratch root's passwd/group and fresh /run and /var/lib, as the
#     service would: tmpfiles creates the directories, the installed juncod
#     --check-config passes on the installed /etc/junco/bench.jsonc unchanged
#     (dialects from the scratch root via JUNCO_DIALECT_DIR), juncod runs as
#     junco, a non-root member of group junco reaches it with plain
#     `junco status` (no option, no JUNCO_SOCKET), a non-member is refused
#     with a hint, and SIGTERM stops juncod with exit 0.
# Usage: deb_test.sh BUILD_DIR SOURCE_DIR PROJECT_VERSION
set -uo pipefail
build=$1 src=$2 version=$3
failures=0
fail() { echo "FAIL: $*"; failures=$((failures + 1)); }
need() { command -v "$1" >/dev/null || { echo "SKIPPED: $1 not installed (tools/setup installs it)"; exit 77; }; }
for t in cpack dpkg-deb dpkg-shlibdeps objdump systemd-sysusers systemd-tmpfiles; do need "$t"; done

# World-traversable scratch: the service user must reach the installed files.
scratch=$(mktemp -d "${TMPDIR:-/tmp}/junco-deb.XXXXXX")
chmod 0755 "$scratch"
cleanup() { rm -rf "$scratch"; }
trap cleanup EXIT
root=$scratch/root

t0=$(date +%s%N)
if ! cpack -G DEB --config "$build/CPackConfig.cmake" -B "$scratch/pkg" >"$scratch/cpack.log" 2>&1; then
  cat "$scratch/cpack.log"; echo "FAIL: cpack -G DEB"; exit 1
fi
t1=$(date +%s%N)
deb=$(ls "$scratch"/pkg/junco_*.deb 2>/dev/null | head -1)
[ -n "$deb" ] || { cat "$scratch/cpack.log"; echo "FAIL: no junco_*.deb from cpack"; exit 1; }
echo "built $(basename "$deb"): $(du -k "$deb" | cut -f1) KiB in $(((t1 - t0) / 1000000)) ms"

# --- 1. control data ---------------------------------------------------------
field() { dpkg-deb -f "$deb" "$1"; }
[ "$(field Package)" = junco ] || fail "Package is '$(field Package)'"
[ "$(field Version)" = "$version" ] || fail "Version is '$(field Version)', project version is $version"
[ "$(field Architecture)" = "$(dpkg --print-architecture)" ] || fail "Architecture is '$(field Architecture)'"
dpkg-deb -f "$deb" Description | grep -q '^ ;' && fail "Description has list separators: $(dpkg-deb -f "$deb" Description)"
depends=$(field Depends)
echo "Depends: $depends"
dpkg-deb -x "$deb" "$root" || { echo "FAIL: dpkg-deb -x"; exit 1; }
# Package names in Depends: versions dropped, one per line (alternatives too).
depend_names=$(sed 's/ *([^)]*)//g; s/ *[|,] */\n/g' <<<"$depends")
needed=$(for p in usr/bin/junco usr/bin/junco-sim usr/sbin/juncod; do objdump -p "$root/$p" | awk '/NEEDED/ { print $2 }'; done | sort -u)
[ "$(wc -w <<<"$needed")" -ge 4 ] || fail "objdump found too few NEEDED libraries: $needed"
for lib in $needed; do
  path=$(ldconfig -p | awk -v l="$lib" '$1 == l { print $NF; exit }')
  owner=$(dpkg -S "$(readlink -f "$path")" 2>/dev/null | head -1 | cut -d: -f1)
  [ -z "$owner" ] && owner=$(dpkg -S "$path" 2>/dev/null | head -1 | cut -d: -f1)
  [ -n "$owner" ] || { fail "no Debian package owns $lib ($path)"; continue; }
  grep -qxF "$owner" <<<"$depend_names" || fail "Depends lacks $owner (for $lib)"
done
dpkg-deb -e "$deb" "$scratch/control"
grep -qx /etc/junco/bench.jsonc "$scratch/control/conffiles" || fail "/etc/junco/bench.jsonc is not a conffile"
for s in postinst prerm postrm; do
  [ -x "$scratch/control/$s" ] || fail "maintainer script $s missing or not executable"
  sh -n "$scratch/control/$s" || fail "maintainer script $s does not parse"
done

# --- 2. files ------------------------------------------------------------------
for f in usr/bin/junco usr/bin/junco-sim usr/sbin/juncod \
         usr/share/man/man1/junco.1.gz usr/share/man/man1/junco-sim.1.gz usr/share/man/man8/juncod.8.gz \
         usr/share/bash-completion/completions/junco \
         usr/lib/systemd/system/juncod.service usr/lib/sysusers.d/junco.conf usr/lib/tmpfiles.d/junco.conf \
         etc/junco/bench.jsonc usr/share/doc/junco/README.md usr/share/doc/junco/copyright \
         usr/share/doc/junco/examples/plan.jsonc usr/share/doc/junco/examples/bench.jsonc \
         usr/share/junco/dialects/scpi-source.json usr/share/junco/python/junco_client.py; do
  [ -e "$root/$f" ] || fail "not installed: /$f"
done
n_docs=$(ls "$src"/docs/*.md | wc -l)
n_inst=$(ls "$root"/usr/share/doc/junco/docs/*.md 2>/dev/null | wc -l)
[ "$n_docs" -eq "$n_inst" ] || fail "share/doc/junco/docs has $n_inst pages, docs/ has $n_docs"
for page in usr/share/man/man1/junco.1.gz usr/share/man/man1/junco-sim.1.gz usr/share/man/man8/juncod.8.gz; do
  w=$(LC_ALL=C.UTF-8 MANWIDTH=80 man --warnings -l "$root/$page" 2>&1 >/dev/null)
  [ -z "$w" ] || fail "$page: $w"
done
cmp -s "$root/etc/junco/bench.jsonc" "$src/tools/examples/bench.jsonc" || fail "/etc/junco/bench.jsonc is not the example config"
unit=$root/usr/lib/systemd/system/juncod.service
for key in ExecStart ExecStartPre; do
  line=$(sed -n "s/^$key=//p" "$unit")
  exe=$(awk '{ print $1 }' <<<"$line")
  cfg=$(sed -n 's/.*--config \([^ ]*\).*/\1/p' <<<"$line")
  [ -x "$root$exe" ] || fail "unit $key runs $exe, not installed"
  [ "$cfg" = /etc/junco/bench.jsonc ] || fail "unit $key reads '$cfg', not /etc/junco/bench.jsonc"
done
unit_user=$(sed -n 's/^User=//p' "$unit")
unit_group=$(sed -n 's/^Group=//p' "$unit")

# --- 3. versions -----------------------------------------------------------------
for p in usr/bin/junco usr/bin/junco-sim usr/sbin/juncod; do
  name=$(basename "$p")
  out=$("$root/$p" --version 2>&1)
  [ "$out" = "$name $version" ] || fail "installed $name --version: '$out', expected '$name $version'"
done

# --- 4. sysusers / tmpfiles into the scratch root ------------------------------
mkdir -p "$root/etc"
cp /etc/passwd /etc/group "$root/etc/"  # root and the system groups (dialout) as on a real system
[ -f /etc/shadow ] && cp /etc/shadow "$root/etc/" && [ -f /etc/gshadow ] && cp /etc/gshadow "$root/etc/"
systemd-sysusers --root="$root" "$root/usr/lib/sysusers.d/junco.conf" || fail "systemd-sysusers --root"
junco_uid=$(awk -F: '$1 == "junco" { print $3 }' "$root/etc/passwd")
junco_gid=$(awk -F: '$1 == "junco" { print $3 }' "$root/etc/group")
[ -n "$junco_uid" ] && [ "$junco_uid" -lt 1000 ] || fail "sysusers made no system user junco (uid '$junco_uid')"
[ -n "$junco_gid" ] || fail "sysusers made no group junco"
[ "$(awk -F: '$1 == "junco" { print $4 }' "$root/etc/passwd")" = "$junco_gid" ] || fail "junco's primary group is not junco"
grep -qE '^dialout:[^:]*:[0-9]+:(.*,)?junco(,|$)' "$root/etc/group" || fail "junco is not in dialout"
[ "$unit_user" = junco ] && [ "$unit_group" = junco ] || fail "unit runs as $unit_user:$unit_group, sysusers makes junco:junco"
systemd-tmpfiles --root="$root" --create "$root/usr/lib/tmpfiles.d/junco.conf" || fail "systemd-tmpfiles --root --create"
for d in run/junco var/lib/junco; do
  got=$(stat -c '%a %u %g' "$root/$d" 2>/dev/null)
  [ "$got" = "750 $junco_uid $junco_gid" ] || fail "/$d is '$got', expected '750 $junco_uid $junco_gid' (mode uid gid)"
done

# --- 5. the service as it would run (root only) ----------------------------------
live=skipped
if [ "$(id -u)" -ne 0 ] || ! command -v unshare >/dev/null || ! command -v setpriv >/dev/null; then
  echo "SKIPPED part 5: needs root, unshare and setpriv"
else
  member_uid=64900 outsider_uid=64901  # not in any passwd: a lab user needs no entry to connect
  cat >"$scratch/ns.sh" <<'NS'
set -u
root=$1 member_uid=$2 outsider_uid=$3 junco_gid=$4
mount -t tmpfs -o mode=0755 tmpfs /run && mount -t tmpfs -o mode=0755 tmpfs /var/lib || { echo "FAIL: tmpfs mounts"; exit 1; }
mount --bind "$root/etc/passwd" /etc/passwd && mount --bind "$root/etc/group" /etc/group || { echo "FAIL: bind passwd/group"; exit 1; }
bad=0
systemd-tmpfiles --create "$root/usr/lib/tmpfiles.d/junco.conf" || { echo "FAIL: tmpfiles --create"; bad=1; }
export JUNCO_DIALECT_DIR=$root/usr/share/junco/dialects
as_junco() { setpriv --reuid=junco --regid=junco --init-groups "$@"; }
# ExecStartPre
if out=$(as_junco "$root/usr/sbin/juncod" --config "$root/etc/junco/bench.jsonc" --check-config 2>&1); then
  grep -qF "($root/usr/share/junco/dialects/scpi-source.json)" <<<"$out" || { echo "FAIL: check-config did not use the installed dialects: $out"; bad=1; }
else
  echo "FAIL: juncod --check-config on the installed config: $out"; bad=1
fi
# ExecStart. juncod listens once its first try to open the bench is over;
# the example's instruments are not there (TEST-NET addresses, no serial
# port), so that takes its retries: about 15 s.
# exec: $! is juncod itself (setpriv execs it), which the SIGTERM below must reach.
setpriv --reuid=junco --regid=junco --init-groups "$root/usr/sbin/juncod" --config "$root/etc/junco/bench.jsonc" --foreground 2>"$root/../juncod.log" &
pid=$!
trap 'kill -KILL $pid 2>/dev/null' EXIT  # never outlive the namespace's mounts
for _ in $(seq 600); do [ -S /run/junco/juncod.sock ] && break; kill -0 $pid 2>/dev/null || break; sleep 0.1; done
if [ ! -S /run/junco/juncod.sock ]; then
  echo "FAIL: juncod made no /run/junco/juncod.sock (exited, or 60 s passed)"; cat "$root/../juncod.log"; exit 1
fi
sock=$(stat -c '%a %U %G' /run/junco/juncod.sock)
[ "$sock" = "660 junco junco" ] || { echo "FAIL: socket is '$sock', expected '660 junco junco'"; bad=1; }
# A lab user in group junco, plain `junco status`, a login-like environment.
mkdir -p /run/user/$member_uid && chown $member_uid /run/user/$member_uid
if out=$(env -i PATH=/usr/bin:/bin HOME=/nonexistent XDG_RUNTIME_DIR=/run/user/$member_uid \
           setpriv --reuid=$member_uid --regid=$member_uid --groups=$junco_gid "$root/usr/bin/junco" status 2>&1); then
  echo "member: $(head -1 <<<"$out")"
else
  echo "FAIL: junco status as a member of junco: $out"; bad=1
fi
if out=$(env -i PATH=/usr/bin:/bin HOME=/nonexistent setpriv --reuid=$outsider_uid --regid=$outsider_uid --clear-groups "$root/usr/bin/junco" status 2>&1); then
  echo "FAIL: junco status as a non-member succeeded: $out"; bad=1
else
  grep -q "/run/junco/juncod.sock.*Permission denied.*group" <<<"$out" || { echo "FAIL: non-member's error lacks the socket, EACCES or the group hint: $out"; bad=1; }
  echo "non-member: $out"
fi
kill -TERM $pid
wait $pid; rc=$?
[ $rc -eq 0 ] || { echo "FAIL: juncod exited $rc on SIGTERM"; cat "$root/../juncod.log"; bad=1; }
exit $bad
NS
  if unshare --mount --propagation private bash "$scratch/ns.sh" "$root" "$member_uid" "$outsider_uid" "$junco_gid"; then
    live=ok
  else
    fail "the installed service in a mount namespace (above)"
  fi
fi

if [ "$failures" -gt 0 ]; then echo "$failures failure(s)"; exit 1; fi
echo "package.deb: package, files, versions, sysusers/tmpfiles OK; live service: $live"
[ "$live" = ok ] || exit 77
