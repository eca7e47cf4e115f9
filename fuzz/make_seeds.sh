#!/usr/bin/env bash
# Writes the seed inputs of the fuzz targets into fuzz/seeds/TARGET/ from `ooksift synth`
# captures (small, low-rate ones, so each run is quick), each prefixed with the selector bytes
# fuzz/harness.rs reads. Run from the repository root after `cargo build --release`:
#
#   fuzz/make_seeds.sh
#
# (Base names differ: each capture's truth sidecar is BASE.truth.json.)
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
bin="$root/target/release/ooksift"
seeds="$root/fuzz/seeds"
tmp="$(mktemp -d)"
trap 'rm -rf "$tmp"' EXIT
rm -rf "$seeds"
mkdir -p "$seeds"/{raw,wav,sigmf_meta,decode_chain,decode_channels}

synth() { "$bin" synth --lead-ms 2 --tail-ms 2 --seed 7 "$@" 2>/dev/null; }
synth --out "$tmp/pwm-env.ru8" --press pwm:0xa5c,unit_us=350,repeats=2 --rate 48000 --snr-db 30
synth --out "$tmp/ppm-env.ru8" --press ppm:0x3c1,unit_us=300,repeats=2 --rate 48000
synth --out "$tmp/pwm-cu8.cu8" --press pwm:0x9f,unit_us=350,repeats=2 --rate 48000
synth --out "$tmp/ppm-ci16.ci16_le" --press ppm:0x5,unit_us=500,repeats=2 --rate 8000
synth --out "$tmp/pwm-cf32.cf32_le" --press pwm:0x6,unit_us=500,repeats=2 --rate 8000
synth --out "$tmp/env.wav" --press pwm:0x5a,unit_us=400,repeats=3 --rate 8000
synth --out "$tmp/iq.wav" --format wav-iq --press ppm:0x5a,unit_us=400,repeats=2 --rate 8000
synth --out "$tmp/float.wav" --wav-bits 0 --press pwm:0x3,unit_us=400,repeats=2 --rate 8000
synth --out "$tmp/offset.cu8" --press pwm:0xa5c,unit_us=350,repeats=2,offset_hz=10000 --rate 48000
synth --out "$tmp/two.cu8" --rate 48000 --press ppm:0x3c1,unit_us=300,repeats=2,offset_hz=-6000 \
    --press pwm:0x9f,unit_us=400,repeats=2,offset_hz=9000,gap_ms=20
synth --out "$tmp/offset16.ci16_le" --press ppm:0x5a,unit_us=500,repeats=2,offset_hz=2000 --rate 8000
synth --out "$tmp/rec.sigmf-meta" --datatype cu8 --press pwm:0x3,unit_us=500,repeats=2 --rate 8000

# prefix FILE BYTES...: the file with selector bytes (decimal) in front.
prefix() {
    local file=$1
    shift
    printf "$(printf '\\%03o' "$@")"
    cat "$file"
}
# Datatype::all() order: rf32_le rf32_be rf64_le rf64_be ri32_le ri32_be ri16_le ri16_be
# ru32_le ru32_be ru16_le ru16_be ri8 ru8, then the same complex (+14): cu8 = 27.
prefix "$tmp/pwm-env.ru8" 13 63 >"$seeds/raw/pwm-env.ru8"
prefix "$tmp/pwm-cu8.cu8" 27 133 >"$seeds/raw/pwm-cu8.cu8"
prefix "$tmp/ppm-ci16.ci16_le" 20 200 >"$seeds/raw/ppm-ci16.ci16_le"
prefix "$tmp/pwm-cf32.cf32_le" 14 7 >"$seeds/raw/pwm-cf32.cf32_le"
cp "$tmp"/*.wav "$seeds/wav/"
cp "$tmp/rec.sigmf-meta" "$seeds/sigmf_meta/rec.sigmf-meta"
{ cat "$tmp/rec.sigmf-meta"; printf '\0'; head -c 2000 "$tmp/rec.sigmf-data"; } >"$seeds/sigmf_meta/rec-with-data"
# decode_chain: format (index above, 28 = WAV), rate (index into CHAIN_RATES: 2 = 8 kHz,
# 3 = 48 kHz), press gap (0 = default).
prefix "$tmp/pwm-env.ru8" 13 3 0 >"$seeds/decode_chain/pwm-env.ru8"
prefix "$tmp/ppm-env.ru8" 13 3 200 >"$seeds/decode_chain/ppm-env.ru8"
prefix "$tmp/pwm-cu8.cu8" 27 3 0 >"$seeds/decode_chain/pwm-cu8.cu8"
prefix "$tmp/ppm-ci16.ci16_le" 20 2 0 >"$seeds/decode_chain/ppm-ci16.ci16_le"
prefix "$tmp/pwm-cf32.cf32_le" 14 2 0 >"$seeds/decode_chain/pwm-cf32.cf32_le"
prefix "$tmp/env.wav" 28 2 0 >"$seeds/decode_chain/env.wav"
prefix "$tmp/iq.wav" 28 2 0 >"$seeds/decode_chain/iq.wav"
# decode_channels: complex datatype (index among the 14: cf32_le 0 ... ci16_le 6, cu8 13), rate,
# press gap.
prefix "$tmp/offset.cu8" 13 3 0 >"$seeds/decode_channels/offset.cu8"
prefix "$tmp/two.cu8" 13 3 0 >"$seeds/decode_channels/two-carriers.cu8"
prefix "$tmp/offset16.ci16_le" 6 2 0 >"$seeds/decode_channels/offset.ci16_le"
prefix "$tmp/pwm-cu8.cu8" 13 3 0 >"$seeds/decode_channels/centred.cu8"
ls -l "$seeds"/*
