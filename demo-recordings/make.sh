#!/bin/sh
# Remakes the demo recordings with tonus's own modal synthesis.
# Run from the project root: sh demo-recordings/make.sh
set -e
T="cargo run --release --quiet --"
D=demo-recordings

# Printing screen A on the stretching table: 500 x 400 mm polyester mesh,
# 40 g/m2, stretched to 20 N/cm, tapped off-centre, microphone near a corner.
$T synth --panel $D/screen-a.panel.toml --tension 20N/cm --pickup-at 0.2,0.8 \
  --t60 0.5s --snr 35 --seed 11 -o $D/screen-a.wav

# Fabric acoustic panel B: 600 x 400 mm, 260 g/m2 at 900 N/m, with 50 Hz hum
# from the bench lights.
$T synth --panel $D/panel-b-hum.panel.toml --tension 900N/m --t60 0.6s --snr 30 \
  --hum 50Hz --hum-level -25 --seed 12 -o $D/panel-b-hum.wav

# Fabric panel C tapped at its centre (every even mode silent) with a frame
# rattle at 333 Hz and a buzz at 1234 Hz.
$T synth --panel $D/panel-c-centre.panel.toml --tension 850N/m --t60 0.6s --snr 30 \
  --extra-tone 333Hz:-10:0.4s --extra-tone 1234Hz:-20:0.2s --seed 13 -o $D/panel-c-centre.wav

# Practice drum head on the bench: 14 in, 0.19 mm film of 1390 kg/m3 at
# 3000 N/m, struck at 0.6 of the radius, 24-bit, with air loading (a light
# film in air); its panel file asks for the air-loaded model.
$T synth --panel $D/drumhead-14in.panel.toml --tension 3000N/m --t60 0.9s --snr 35 \
  --bits 24 --air --seed 14 -o $D/drumhead-14in.wav

# Screen D tapped twice, second tap 0.7 s after the first.
$T synth --panel $D/screen-d-double.panel.toml --tension 18N/cm --t60 0.4s --snr 30 \
  --taps 2 --tap-interval 0.7s --length 1.6s --seed 15 -o $D/screen-d-double.wav

# Screen E recorded too hot: 6 dB over the converter's range.
$T synth --panel $D/screen-e-clipped.panel.toml --tension 21N/cm --t60 0.5s --snr 35 \
  --gain 6 --seed 16 -o $D/screen-e-clipped.wav
