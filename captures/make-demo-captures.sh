#!/usr/bin/env bash
# Writes the demo captures of captures/ with `ooksift synth`. Run from the repository root
# after `cargo build --release`. The captures are committed; this script documents (and can
# reproduce) exactly how they were made.
set -euo pipefail
B=${OOKSIFT:-target/release/ooksift}
cd "$(dirname "$0")"
B=$(cd .. && realpath "$B")

# The yard gate: a mains-powered PWM remote, 24-bit code, pressed twice; raw cu8 IQ.
"$B" synth --out harrowgate-gate.cu8 --force --rate 250000 --snr-db 24 --seed 11 \
  --press "pwm:0x6b2d41,unit_us=350,repeats=6,offset_hz=25000" \
  --press "pwm:0x6b2d41,unit_us=350,repeats=6,offset_hz=25000,gap_ms=400"

# The workshop chime: a pulse-distance doorbell recorded from a receiver's data pin by a
# sound card (mono 16-bit WAV envelope, 48 kHz).
"$B" synth --out harrowgate-chime.wav --force --rate 48000 --snr-db 22 --seed 12 \
  --press "ppm:0xc3a5e817,unit_us=400,repeats=3"

# The two battery-free kinetic light switches by the door: short 16-bit frames, three
# repeats each, as a SigMF recording at 433.92 MHz.
"$B" synth --out harrowgate-lamps.sigmf-meta --force --rate 250000 --center-hz 433920000 \
  --snr-db 24 --seed 13 \
  --press "pwm:0x9e31,unit_us=250,repeats=3,offset_hz=-30000" \
  --press "pwm:0x9e32,unit_us=250,repeats=3,offset_hz=-30000,gap_ms=250"
