#!/usr/bin/env bash
# Throughput and peak-memory benchmark (issues 2 and 3); see docs/benchmarks.md.
#
#   cargo build --release -j 2
#   python3 -m venv /tmp/bench-venv && /tmp/bench-venv/bin/pip install -r tests/reference/requirements.txt
#   scripts/throughput.sh [WORKDIR]          # default /tmp/ooksift-throughput (needs ~3 GB)
#
# Steps, one process at a time: synthesize the captures (not timed), then in one run time
# a plain read of the 66 s cu8 file (dd bs=1M, page cache warm), `ooksift decode` on it (one thread),
# the numpy/scipy front end on it (scripts/front_numpy_file.py), ooksift once more, and once
# with the squelch off; then peak memory (/usr/bin/time -v) of decode on 60 s vs 600 s cu8
# (squelch on and off) and on 60 s vs 600 s ru8.
set -euo pipefail
cd "$(dirname "$0")/.."
DIR=${1:-/tmp/ooksift-throughput}
BIN=target/release/ooksift
PY=${PY:-/tmp/bench-venv/bin/python}
mkdir -p "$DIR"

# Presses every 15 s, alternating two invented buttons: "gate" (24-bit PWM, +100 kHz) and
# "chime" (32-bit PPM, -250 kHz), 8 frames each.
press_args() { # $1 = seconds of capture
  local n=$(( $1 / 15 )) i
  for ((i = 0; i < n; i++)); do
    if ((i % 2 == 0)); then
      echo "--press pwm:0xb2e169,unit_us=350,repeats=8,offset_hz=100000,gap_ms=14500"
    else
      echo "--press ppm:0x5a17c3e9,unit_us=400,repeats=8,offset_hz=-250000,gap_ms=14500"
    fi
  done
}
synth() { # $1 = out, $2 = seconds, $3 = format, $4 = rate
  [ -f "$1" ] && return 0
  # shellcheck disable=SC2046
  $BIN synth --out "$1" --format "$3" --rate "$4" --amplitude 0.05 --snr-db 22 --seed 7 \
    --lead-ms 500 --duration-ms $(( $2 * 1000 )) $(press_args "$2") > /dev/null
}
timed() { # $1 = label, $2 = stdout file, rest = command; prints wall, user+sys, max RSS
  local label=$1 out=$2; shift 2
  /usr/bin/time -v -o "$DIR/time.txt" "$@" > "$out"
  awk -v l="$label" -F': ' '
    /User time/ {u=$2} /System time/ {s=$2} /Elapsed \(wall/ {w=$2}
    /Maximum resident/ {m=$2}
    END {printf "TIME %-28s wall %s  cpu %.2f s  maxrss %.1f MiB\n", l, w, u+s, m/1024}' "$DIR/time.txt"
}

echo "date: $(date -u '+%Y-%m-%d %H:%M UTC'); $(nproc) cores; $(uname -r)"
echo "ooksift: $(git rev-parse --short HEAD); $($PY -c 'import numpy, scipy; print("numpy", numpy.__version__, "scipy", scipy.__version__)')"

synth "$DIR/t66.cu8" 66 cu8 2048000
synth "$DIR/m60.cu8" 60 cu8 2048000
synth "$DIR/m600.cu8" 600 cu8 2048000
synth "$DIR/e60.ru8" 60 ru8 250000
synth "$DIR/e600.ru8" 600 ru8 250000
ls -l "$DIR"/*.cu8 "$DIR"/*.ru8

F=$DIR/t66.cu8
SAMPLES=$(( $(stat -c %s "$F") / 2 ))
echo "throughput file: $F, $SAMPLES complex samples, $(echo "$SAMPLES / 2048000" | bc -l | cut -c1-6) s at 2.048 MHz"
cat "$F" > /dev/null   # warm the page cache
# dd, not cat: cat > /dev/null may hand the copy to the kernel (copy_file_range/splice) and
# never read the bytes into user space.
timed "plain read (dd bs=1M)" /dev/null dd if="$F" of=/dev/null bs=1M status=none
timed "ooksift decode #1" "$DIR/t66.json" $BIN decode --rate 2048000 --json "$F"
timed "numpy/scipy front end" "$DIR/numpy.txt" $PY scripts/front_numpy_file.py "$F" --offset-hz 100000
sed "s/^/  numpy: /" "$DIR/numpy.txt"
timed "ooksift decode #2" /dev/null $BIN decode --rate 2048000 --json "$F"
# Every channel reading the whole file: the cost when the band is busy all the time.
timed "ooksift decode, squelch off" /dev/null env OOKSIFT_NO_SQUELCH=1 $BIN decode --rate 2048000 --json "$F"
$PY - "$DIR/t66.json" "$DIR/t66.truth.json" <<'PY'
import json, sys
r, t = (json.load(open(p)) for p in sys.argv[1:3])
got = sorted((c["key_id"], c["presses"], c["frames"]) for c in r["codes"])
want = sorted((c["key_id"], c["presses"], c["frames"]) for c in t["codes"])
print("decoded codes:", got, "truth:", want, "MATCH" if got == want else "MISMATCH")
PY

echo "peak memory, IQ cu8 2.048 MHz:"
timed "decode 60 s cu8" /dev/null $BIN decode --rate 2048000 --json "$DIR/m60.cu8"
timed "decode 600 s cu8" /dev/null $BIN decode --rate 2048000 --json "$DIR/m600.cu8"
timed "decode 60 s cu8, squelch off" /dev/null env OOKSIFT_NO_SQUELCH=1 $BIN decode --rate 2048000 --json "$DIR/m60.cu8"
timed "decode 600 s cu8, squelch off" /dev/null env OOKSIFT_NO_SQUELCH=1 $BIN decode --rate 2048000 --json "$DIR/m600.cu8"
echo "peak memory, envelope ru8 250 kHz:"
timed "decode 60 s ru8" /dev/null $BIN decode --rate 250000 --json "$DIR/e60.ru8"
timed "decode 600 s ru8" /dev/null $BIN decode --rate 250000 --json "$DIR/e600.ru8"
