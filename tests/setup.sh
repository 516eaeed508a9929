#!/usr/bin/env bash
# Sets up what `cargo test --workspace` needs beyond the Rust crates, so the
# README's test command runs every test, the firmware in QEMU included:
#
#   tests/setup.sh && cargo test --workspace
#
# 1. The Rust toolchain, its components and the Cortex-M targets named in
#    rust-toolchain.toml (rustup installs what is missing; nothing happens
#    when everything is there).
# 2. QEMU's Arm system emulator (`qemu-system-arm`). When it is missing this
#    script INSTALLS A SYSTEM PACKAGE: the Debian package qemu-system-arm,
#    with `apt-get` (through sudo when not root). Set ISOCHOR_NO_SYSTEM_INSTALL=1
#    to be told the command instead of having it run.
#
# Safe to run again: it only acts on what is missing. Exit status 1 when
# something is still missing afterwards, with the command that fixes it.
set -euo pipefail
cd "$(dirname "$0")/.."

say() { printf 'setup: %s\n' "$*"; }
fail() {
    printf 'setup: %s\n' "$*" >&2
    exit 1
}

# --- 1. Rust toolchain, components, targets (from rust-toolchain.toml) -----
targets="$(sed -n 's/^targets *= *\[\(.*\)\]/\1/p' rust-toolchain.toml | tr -d '"' | tr ',' ' ' | tr -s ' ')"
components="$(sed -n 's/^components *= *\[\(.*\)\]/\1/p' rust-toolchain.toml | tr -d '"' | tr ',' ' ' | tr -s ' ')"

command -v cargo >/dev/null 2>&1 ||
    fail "cargo is missing: install Rust with rustup (https://rustup.rs), then run this again"

# rustup installs the toolchain of rust-toolchain.toml the first time rustc
# runs here; where its automatic install is off, ask for it.
if ! rustc --version >/dev/null 2>&1; then
    command -v rustup >/dev/null 2>&1 ||
        fail "rustc does not run: install Rust with rustup (https://rustup.rs)"
    say "installing the Rust toolchain named in rust-toolchain.toml"
    rustup toolchain install # no argument: the active one, from rust-toolchain.toml
fi
sysroot="$(rustc --print sysroot)"
host="$(rustc -vV | sed -n 's/^host: //p')"
missing_targets=""
for t in $targets; do
    [ -d "$sysroot/lib/rustlib/$t/lib" ] || missing_targets="$missing_targets $t"
done
missing_components=""
for c in $components; do
    case "$c" in
    rustfmt) cargo fmt --version >/dev/null 2>&1 || missing_components="$missing_components $c" ;;
    clippy) cargo clippy --version >/dev/null 2>&1 || missing_components="$missing_components $c" ;;
    llvm-tools | llvm-tools-preview)
        [ -x "$sysroot/lib/rustlib/$host/bin/llvm-size" ] || missing_components="$missing_components $c"
        ;;
    *) missing_components="$missing_components $c" ;; # unknown here: let rustup decide
    esac
done
if [ -n "$missing_targets$missing_components" ]; then
    command -v rustup >/dev/null 2>&1 ||
        fail "missing Rust parts:$missing_targets$missing_components; they come from rustup (https://rustup.rs)"
    if [ -n "$missing_components" ]; then
        say "adding Rust components:$missing_components"
        # shellcheck disable=SC2086
        rustup component add $missing_components
    fi
    if [ -n "$missing_targets" ]; then
        say "adding Rust targets:$missing_targets"
        # shellcheck disable=SC2086
        rustup target add $missing_targets
    fi
fi
say "Rust: $(rustc --version), targets:$targets"

# --- 2. QEMU (a system package) -------------------------------------------
if ! command -v qemu-system-arm >/dev/null 2>&1; then
    fix="sudo apt-get install qemu-system-arm"
    [ "$(id -u)" -eq 0 ] && fix="apt-get install qemu-system-arm"
    if [ "${ISOCHOR_NO_SYSTEM_INSTALL:-}" = 1 ]; then
        fail "qemu-system-arm is missing; install it with: $fix"
    fi
    command -v apt-get >/dev/null 2>&1 ||
        fail "qemu-system-arm is missing and this is not a Debian-like system: install QEMU's Arm system emulator (qemu-system-arm) with your package manager"
    say "qemu-system-arm is missing: installing the SYSTEM PACKAGE qemu-system-arm with apt-get"
    if [ "$(id -u)" -eq 0 ]; then
        as_root=()
    elif command -v sudo >/dev/null 2>&1; then
        say "(through sudo: it may ask for your password)"
        as_root=(sudo)
    else
        fail "not root and no sudo: install it as root with: apt-get install qemu-system-arm"
    fi
    "${as_root[@]}" apt-get update -qq
    "${as_root[@]}" env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq qemu-system-arm
    command -v qemu-system-arm >/dev/null 2>&1 || fail "qemu-system-arm still missing; try: $fix"
fi
say "QEMU: $(qemu-system-arm --version | head -n 1)"
say "ready: cargo test --workspace runs every test, the firmware in QEMU included"
