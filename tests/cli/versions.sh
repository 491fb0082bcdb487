# kiln --version and manifest.json name the version of every library that decodes, unpacks or
# hashes the bytes -- the library's own version, not the API it emulates (libjpeg-turbo's
# message table says "6b 27-Mar-1998") -- and those are the versions the system installed. The
# outside check is Debian's package database: the library file kiln loads (ldd) belongs to a
# package (dpkg -S) whose upstream version (dpkg-query) is the recorded one.
. "$(dirname "$0")/lib.sh"
command -v dpkg-query >/dev/null && command -v ldd >/dev/null ||
    skip "dpkg-query and ldd are needed (a Debian system)"
expect_exit 0 "$KILN" --version
cp "$work/stdout" "$work/version"
grep -Eq '^kiln [0-9]+\.[0-9]+\.[0-9]+$' "$work/version" || fail "no kiln version line"
ldd "$KILN" > "$work/ldd"
# library name as kiln prints it -> shared object it lives in
declare -A soname=([libpng]=libpng16.so [libjpeg-turbo]=libjpeg.so [libtiff]=libtiff.so
    [zlib]=libz.so [libdeflate]=libdeflate.so [libarchive]=libarchive.so [openssl]=libcrypto.so [jansson]=libjansson.so)
for lib in "${!soname[@]}"; do
    line=$(grep -E "^$lib [^ ]+$" "$work/version") || fail "--version does not name $lib: $(cat "$work/version")"
    got=${line#* }
    file=$(awk -v so="${soname[$lib]}" 'index($1, so) == 1 && $2 == "=>" { print $3 }' "$work/ldd")
    [ -n "$file" ] || fail "kiln does not load ${soname[$lib]}"
    real=$(readlink -f "$file")
    owner=$(dpkg -S "$real" 2>/dev/null || dpkg -S "${real#/usr}" 2>/dev/null) ||
        skip "$real belongs to no Debian package"
    pkg=${owner%%: *}
    deb=$(dpkg-query -W -f='${Version}' "$pkg")
    # Debian version -> upstream: no epoch ("1:"), no revision ("-2+deb12u4"), no repack
    # suffix (".dfsg"): Debian Policy 5.6.12.
    up=${deb#*:}
    up=${up%-*}
    up=${up%[.+~]dfsg*}
    [ "$got" = "$up" ] || fail "$lib: kiln reports $got, package $pkg is $deb (upstream $up)"
done
# The manifest records the same list.
demo_data "$work/data"
expect_exit 0 "$KILN" build "$work/data" -o "$work/out" --seed 1 --size 8 -q
"$PYTHON" - "$work/out/manifest.json" "$work/version" <<'PY' || fail "manifest libraries differ"
import json, sys
libs = json.load(open(sys.argv[1]))["libraries"]
printed = dict(l.split(" ", 1) for l in open(sys.argv[2]).read().splitlines()[1:])
assert libs == printed, (libs, printed)
PY
echo ok
