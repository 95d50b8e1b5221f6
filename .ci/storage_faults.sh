#!/usr/bin/env bash
# Storage faults that need real mounts (RELIABILITY.md D1, D5, D8; issue 5
# item 7), run by .ci/run after `cargo test`:
#   disk full on a loop-mounted 8 MiB ext4 (tmpfs hides the SIGBUS that WAL
#   mode can meet on a full ext4, finding 1): the free-space check refuses a
#   too-large import before writing; an import that meets a full disk anyway
#   is refused cleanly; reads and verify work while the disk is full.
#   a read-only bind mount (root ignores chmod, finding 3): imports refused
#   with "read-only", reports and verify still work.
# Each check prints `storage: ...` counts, or `storage: SKIPPED: why` where
# it cannot mount; a skip never counts as a pass of the check. Exit 1 on any
# failure. Needs root, util-linux (losetup, mount) and e2fsprogs (mkfs.ext4).
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --quiet
FLUE="$PWD/target/debug/flue"
export FLUE_NOW=2040-01-15T10:00:00Z FLUE_USER=storage-faults
unset FLUE_LEDGER FLUE_TEST_MAX_PAGES FLUE_CRASH_AT

W=$(mktemp -d)
MOUNTS=()
cleanup() {
    for m in "${MOUNTS[@]}"; do umount "$m" 2>/dev/null || umount -l "$m" 2>/dev/null || true; done
    rm -rf "$W"
}
trap cleanup EXIT

failures=0
skipped=0
# A counts line, also appended to $FLUE_FAULTS_LOG (.ci/run's summary) when set.
say() {
    echo "$*"
    if [ -n "${FLUE_FAULTS_LOG:-}" ]; then echo "$*" >>"$FLUE_FAULTS_LOG"; fi
}
fail() { say "storage: FAIL: $*"; failures=$((failures + 1)); }
skip() { say "storage: SKIPPED: $*"; skipped=$((skipped + 1)); }

# Run flue; sets RC and ERR. A death by signal (exit > 128) is a failure.
run() {
    set +e
    "$FLUE" "$@" >"$W/out" 2>"$W/err"
    RC=$?
    set -e
    ERR=$(cat "$W/err")
    if [ "$RC" -gt 2 ]; then fail "flue $* ended with $RC (signal or panic): $ERR"; fi
}
# The journal's entry count and head, as verify prints them.
state() {
    local out
    out=$("$FLUE" --ledger "$1" verify 2>&1) || true
    echo "${out%%$'\n'*}"
}

"$FLUE" demo --dir "$W/demo" >/dev/null 2>&1
DEMO="$W/demo"
# 20,000 hours of K2 from 2026 on: rows the demo ledger does not hold.
{
    head -1 "$DEMO/hourly-k2.csv"
    for year in 2026 2027 2028; do
        tail -n +2 "$DEMO/hourly-k2.csv" | sed "s/^\([^,]*\),2025-/\1,$year-/"
    done
} | awk "NR <= 20001" >"$W/hourly-20k.csv"
# January 2025's fuel records moved to 2026: new rows for the demo ledger.
{ head -1 "$DEMO/fuel.csv"; grep ',2025-01-01,2025-01-31,' "$DEMO/fuel.csv" | sed 's/,2025-01-01,2025-01-31,/,2026-01-01,2026-01-31,/'; } >"$W/fuel-2026.csv"

sed 's/^name = "Marrow Creek Station"/name = "Marrow Creek Generating Station"/' "$DEMO/site.toml" >"$W/site-renamed.toml"

can_mount=""
if [ "$(id -u)" != 0 ]; then
    can_mount="not root"
else
    for tool in losetup mkfs.ext4 mount umount; do
        command -v "$tool" >/dev/null || can_mount="no $tool"
    done
fi

# ---- disk full on ext4 ----
diskfull() {
    local img="$W/ext4.img" mnt="$W/ext4"
    truncate -s 8M "$img"
    mkfs.ext4 -q -F -m 0 "$img"
    mkdir -p "$mnt"
    if ! mount -o loop "$img" "$mnt" 2>"$W/err"; then
        skip "disk full on ext4: mount -o loop failed: $(cat "$W/err")"
        return
    fi
    MOUNTS+=("$mnt")
    local db="$mnt/flue.db"
    cp "$DEMO/flue.db" "$db"
    local before sha
    before=$(state "$db")
    sha=$(sha256sum <"$db")
    local refused_preflight=0 refused_full=0 raced=0 reads_while_full=0

    # 1. Too little room for the estimate: refused before anything is written.
    local free_kib
    free_kib=$(df -k --output=avail "$mnt" | tail -1)
    dd if=/dev/zero of="$mnt/filler" bs=1k count=$((free_kib - 1024)) status=none
    run --ledger "$db" import hourly "$W/hourly-20k.csv"
    if [ "$RC" = 1 ] && grep -q "not enough free disk space" <<<"$ERR"; then
        refused_preflight=1
        echo "storage: preflight refusal: $ERR"
    else
        fail "preflight: exit $RC, $ERR"
    fi
    [ -e "$db-journal" ] && fail "preflight left a journal"
    [ "$(sha256sum <"$db")" = "$sha" ] || fail "preflight: the ledger file changed"
    rm "$mnt/filler"

    # 2. Room at the start, none soon after: the disk fills while importing.
    local try
    for try in 1 2 3; do
        "$FLUE" --ledger "$db" import hourly "$W/hourly-20k.csv" >"$W/out" 2>"$W/err" &
        local pid=$! waited=0
        # The rollback journal appears with the transaction's first write.
        while [ ! -e "$db-journal" ] && kill -0 "$pid" 2>/dev/null && [ $waited -lt 2000 ]; do
            sleep 0.005
            waited=$((waited + 1))
        done
        dd if=/dev/zero of="$mnt/filler" bs=64k status=none 2>/dev/null || true # until ENOSPC
        set +e
        wait "$pid"
        RC=$?
        set -e
        ERR=$(cat "$W/err")
        if [ "$RC" = 0 ]; then
            # The import finished before the disk filled: undo by a fresh copy.
            raced=$((raced + 1))
            rm -f "$mnt/filler" "$db"
            cp "$DEMO/flue.db" "$db"
            continue
        fi
        if [ "$RC" = 1 ] && grep -q "disk full" <<<"$ERR"; then
            refused_full=1
            echo "storage: disk-full refusal: $ERR"
        else
            fail "disk full: exit $RC (want 1, no signal), $ERR"
        fi
        break
    done
    [ "$refused_full" = 1 ] || fail "disk full: the import beat the filler $raced times"
    # While full: reads and verify work (no SIGBUS) and see the old ledger.
    run --ledger "$db" verify
    if [ "$RC" = 0 ]; then reads_while_full=$((reads_while_full + 1)); else fail "verify while full: $RC $ERR"; fi
    run --ledger "$db" report annual --year 2025
    if [ "$RC" = 0 ]; then reads_while_full=$((reads_while_full + 1)); else fail "report while full: $RC $ERR"; fi
    [ "$(state "$db")" = "$before" ] || fail "disk full: journal head moved"
    [ -e "$db-journal" ] && fail "disk full left a journal"
    [ "$(sha256sum <"$db")" = "$sha" ] || fail "disk full: the ledger file changed"
    # Once there is room, the same import goes through.
    rm -f "$mnt/filler"
    run --ledger "$db" import hourly "$W/hourly-20k.csv"
    if [ "$RC" != 0 ] || ! grep -q "20000 new" "$W/out"; then fail "import after freeing space: $RC $ERR"; fi
    run --ledger "$db" verify
    [ "$RC" = 0 ] || fail "verify after the import: $ERR"
    say "storage: diskfull_ext4 image=8MiB refused_preflight=$refused_preflight refused_full=$refused_full raced=$raced reads_while_full=$reads_while_full signals=0 unchanged=1"
}

# ---- read-only bind mount ----
readonly_mount() {
    local rw="$W/rw" ro="$W/ro"
    mkdir -p "$rw" "$ro"
    cp "$DEMO/flue.db" "$rw/flue.db"
    if ! mount --bind "$rw" "$ro" 2>"$W/err"; then
        skip "read-only bind mount: mount --bind failed: $(cat "$W/err")"
        return
    fi
    MOUNTS+=("$ro")
    if ! mount -o remount,bind,ro "$ro" 2>"$W/err"; then
        skip "read-only bind mount: remount,ro failed: $(cat "$W/err")"
        return
    fi
    local db="$ro/flue.db" sha refused=0 reads=0
    sha=$(sha256sum <"$db")
    for args in "import fuel $W/fuel-2026.csv" "import hourly $W/hourly-20k.csv" "site load $W/site-renamed.toml"; do
        # shellcheck disable=SC2086
        run --ledger "$db" $args
        if [ "$RC" = 1 ] && grep -q "ledger is read-only" <<<"$ERR"; then
            refused=$((refused + 1))
            echo "storage: readonly refusal: $ERR"
        else
            fail "read-only: $args: exit $RC, $ERR"
        fi
    done
    run --ledger "$db" report annual --year 2025
    if [ "$RC" = 0 ]; then reads=$((reads + 1)); else fail "read-only: report: $ERR"; fi
    run --ledger "$db" verify
    if [ "$RC" = 0 ]; then reads=$((reads + 1)); else fail "read-only: verify: $ERR"; fi
    [ "$(sha256sum <"$db")" = "$sha" ] || fail "read-only: the ledger changed"
    say "storage: readonly_bind_mount writes_refused=$refused reads_ok=$reads unchanged=1"
}

if [ -n "$can_mount" ]; then
    skip "disk full on ext4: $can_mount"
    skip "read-only bind mount: $can_mount"
else
    diskfull
    readonly_mount
fi
say "storage: failures=$failures skipped=$skipped"
[ "$failures" = 0 ]
