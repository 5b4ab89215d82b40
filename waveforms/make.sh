#!/usr/bin/env bash
# Regenerates the example recordings of this folder from their profiles (invented
# scenarios, see README.md). Run from the project root: bash waveforms/make.sh
# Every file is 16-bit mono at 10 kHz, 650.538 V per full scale (twice the 230 V peak).
set -euo pipefail
synth() { cargo run --release --quiet -- synth "$@"; }

# A compressor motor starting on a weak rural line: the voltage falls to 75% at once and
# recovers over two seconds as the motor comes up to speed.
synth "vary:75%:0cyc/5cyc/100cyc" --out waveforms/motor-start-sag.wav \
  --lead 25cyc --tail 50cyc --harmonics 3:2,5:1.5 --noise 0.3

# A lightly loaded standby generator taking a load step off: its regulator overshoots to
# 116% for about a second and settles back.
synth "vary:116%:10cyc/50cyc/40cyc" --out waveforms/generator-swell.wav \
  --lead 25cyc --tail 50cyc --harmonics 3:3 --noise 0.5

# An auto-recloser clearing a transient fault: 300 ms without supply, 500 ms back, another
# 300 ms without, then the line holds.
synth "interrupt:300ms;gap:500ms;interrupt:300ms" --out waveforms/recloser.wav \
  --lead 25cyc --tail 100cyc --harmonics 3:2 --noise 0.3

# A minute of a harmonic-rich, noisy supply with three events: a 60% dip of 8 cycles, a
# 113% swell of 30 cycles and a 200 ms interruption.
synth "gap:15s;dip:60%:8cyc;gap:15s;swell:113%:30cyc;gap:15s;interrupt:200ms" \
  --out waveforms/noisy-minute.wav --lead 5cyc --tail 10s \
  --harmonics 3:4,5:3,7:1.5 --noise 1
