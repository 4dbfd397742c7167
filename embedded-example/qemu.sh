#!/usr/bin/env bash
# Build the firmware example for one core, run it under QEMU with a
# deterministic instruction count, decode its defmt log, and print the
# summary lines. Exits non-zero when any ZVS cycle turned on early or late.
#
#   embedded-example/qemu.sh cortex-m4f     # thumbv7em-none-eabihf on mps2-an386
#   embedded-example/qemu.sh cortex-m0      # thumbv6m-none-eabi on mps2-an385
#   PANIC_NEVER=1 embedded-example/qemu.sh cortex-m0   # only link the panic-free proof builds
#
# The proof builds (one per runtime method, plus `table-any` for any
# validated table and `none`, the sweep alone) also give each method's
# flash bytes: text + rodata of its build less that of `none`.
#
# Toolchain: the rustup toolchain when it has the thumb target installed
# (`rustup target add thumbv7em-none-eabihf thumbv6m-none-eabi`); otherwise
# Debian's rustc-web with -Z build-std=core and ld.lld-16 (DESIGN.md
# section 5), installed here when missing and running as root.
set -euo pipefail
here="$(cd "$(dirname "$0")" && pwd)"
cd "$here"

case "${1:-}" in
  cortex-m4f) triple=thumbv7em-none-eabihf machine=mps2-an386 cpu=cortex-m4 ;;
  cortex-m0)  triple=thumbv6m-none-eabi    machine=mps2-an385 cpu=cortex-m3 ;;
  *) echo "usage: $0 cortex-m4f|cortex-m0" >&2; exit 2 ;;
esac
target_name=$1

need=()
command -v qemu-system-arm >/dev/null 2>&1 || need+=(qemu-system-arm)
command -v readelf >/dev/null 2>&1 || need+=(binutils)
if rustup target list --installed 2>/dev/null | grep -qx "$triple"; then
  route=rustup
else
  route=debian
  [ -x /usr/bin/rustc ] || need+=(rustc-web)
  [ -x /usr/bin/cargo ] || need+=(cargo-web)
  [ -d /usr/lib/rustlib/src/rust/library/core ] || need+=(rust-web-src)
  command -v ld.lld-16 >/dev/null 2>&1 || need+=(lld-16)
fi
if [ "${#need[@]}" -gt 0 ]; then
  if [ "$(id -u)" -eq 0 ] && command -v apt-get >/dev/null 2>&1; then
    echo "qemu.sh: installing ${need[*]}" >&2
    apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${need[@]}" >/dev/null
  else
    echo "qemu.sh: missing ${need[*]}; install them (Debian: apt-get install ${need[*]})" >&2
    exit 1
  fi
fi
if ! command -v defmt-print >/dev/null 2>&1; then
  echo "qemu.sh: installing defmt-print (cargo install --locked defmt-print, about a minute)" >&2
  cargo install --locked --quiet defmt-print
fi

upper=$(echo "$triple" | tr 'a-z-' 'A-Z_')
build() {
  if [ "$route" = rustup ]; then
    cargo build --quiet --release --target "$triple" "$@"
  else
    env RUSTC=/usr/bin/rustc RUSTC_BOOTSTRAP=1 "CARGO_TARGET_${upper}_LINKER=ld.lld-16" \
      /usr/bin/cargo build --quiet --release -Z build-std=core --target "$triple" "$@"
  fi
}
# Bytes of the ELF section named $2 of $1 (readelf works on any ELF).
sec() { local h; h=$(readelf -S -W "$1" | sed 's/^ *\[ *[0-9]*\] *//' | awk -v n="$2" '$1 == n { print $5 }' | head -n 1); echo $((16#${h:-0})); }
flash_of() { echo $(( $(sec "$1" .text) + $(sec "$1" .rodata) + $(sec "$1" .vector_table) )); }

if [ -n "${PANIC_NEVER:-}" ]; then
  # The proof builds have no logging, so build.rs links them without
  # defmt's linker script (which keeps defmt's own panic hook alive on
  # purpose). They share the target directory with the scenario build.
  elf="target/$triple/release/embedded-example"
  base=0
  for m in none table table-any closed-form-f32 fixed-point libm-f32 micromath-f32 leg trim blob; do
    if ! build --no-default-features --features "proof-$m"; then
      echo "PANIC-NEVER target=$target_name method=$m linked=no (a panic path survives, see the undefined symbol above)" >&2
      exit 1
    fi
    bytes=$(flash_of "$elf")
    if [ "$m" = none ]; then
      base=$bytes
      continue
    fi
    echo "PANIC-NEVER target=$target_name method=$m linked=yes (no panic path survives)"
    [ "$m" = table-any ] || echo "FLASH target=$target_name method=$m bytes=$((bytes - base))"
  done
  exit 0
fi
build
elf="target/$triple/release/embedded-example"

raw=$(mktemp)
trap 'rm -f "$raw"' EXIT
set +e
qemu-system-arm -machine "$machine" -cpu "$cpu" -nographic \
  -semihosting-config enable=on,target=native \
  -icount shift=8,align=off,sleep=off -kernel "$elf" > "$raw"
qemu_rc=$?
set -e
log=$(defmt-print -e "$elf" < "$raw")
echo "$log"

# Memory: sections of the ELF, and the tables' share (the build-time
# entries plus the flash blob, whose size the firmware logs).
text=$(flash_of "$elf")
ram=$(( $(sec "$elf" .data) + $(sec "$elf" .bss) + $(sec "$elf" .uninit) ))
sym() { readelf -s -W "$elf" | awk -v n="$1" '$8 ~ n { s += $3 } END { print s + 0 }'; }
blob_bytes=$(echo "$log" | sed -n 's/.*table blob accepted: \([0-9]*\) bytes.*/\1/p' | head -n 1)
# The cell's build-time entries (module `built`) and the leg's two edge
# tables (module `leg::tables`), apart.
table=$(( $(sym 'built[0-9]*ENTRIES') + ${blob_bytes:-0} ))
leg_table=$(sym 'tables[0-9]*[A-Z]*_ENTRIES')

echo
echo "$log" | grep -o 'ZVS-SUMMARY .*' || true
echo "$log" | grep -o 'ISR-COST .*' || true
echo "$log" | grep -o 'METHOD-RUN .*' || true
echo "$log" | grep -o 'TRIM-SUMMARY .*' || true
echo "MEMORY target=$target_name table_flash_bytes=$table leg_table_flash_bytes=$leg_table text_bytes=$text ram_bytes=$ram"

# Every scenario's summary (the resonant cell's, each leg edge's) must
# show no early and no late turn-on.
summaries=$(echo "$log" | grep -o 'ZVS-SUMMARY .*' || true)
missed=$(echo "$summaries" | grep -vc ' early=0 late=0' || true)
# Every trim scenario ran and kept its commands inside the envelope (the
# firmware's exit code covers the freezes within their stated cycles).
trims=$(echo "$log" | grep -o 'TRIM-SUMMARY .*' || true)
if [ "$(echo "$trims" | grep -c 'outside_envelope=0 frozen_not_ff=0')" -ne 6 ]; then
  echo "qemu.sh: FAILED (the trim's scenarios: a command outside the envelope, or a frozen trim not commanding the feed-forward)" >&2
  exit 1
fi
if [ "$(echo "$summaries" | grep -c 'ZVS-SUMMARY')" -lt 3 ] || [ "$qemu_rc" -ne 0 ] || [ "$missed" != 0 ]; then
  echo "qemu.sh: FAILED (qemu exit $qemu_rc; $missed summary lines with early or late turn-ons, see above and the METHOD-RUN lines)" >&2
  exit 1
fi
