#!/usr/bin/env bash
# Runs `tonus fit` on every membrane-drum sample fetched by
# scripts/fetch-real-drums.sh and prints one table row per sample beside an
# outside pitch estimate. Nobody knows these drums' true tensions; what can
# be checked is behaviour: a bounded run time, a (0,1) frequency that agrees
# with the outside pitch, and a grade that the fit earns.
#
# Usage: bash scripts/real-drums.sh [DIR]      (DIR default: real-drums)
#   TONUS=path/to/tonus  the binary (default: $CARGO_TARGET_DIR or target,
#                        release build; build it first: cargo build --release)
#   TIMEOUT_S=10         wall-time limit of one `tonus fit`; a run cut by it
#                        is reported as TIMEOUT, a failure
#   ONLY=REGEX           run only the samples whose "kit/file" matches
# Needs: sox (decoding for the pitch estimate), python3 with numpy.
#
# Each run: tonus fit FILE --diameter D --areal-density 0.26kg/m2 --json
#
# Columns:
#   sample   kit/file (kits shortened: millo, vari, circ, gimme)
#   D        the diameter given (guessed from the name, see below)
#   wall_s   wall time of the run (date before and after, so process start
#            and the Bessel zeros of the circle's lines are included)
#   exit     tonus's exit status (0 sound or fair, 1 doubtful or unfit, 2
#            error; TIMEOUT when cut at TIMEOUT_S)
#   grade    quality grade from the JSON (or the error, shortened)
#   T_N/m    fitted tension
#   f01_Hz   the (0,1) mode's measured frequency; "285.6p" = no partial was
#            matched to (0,1), this is the fit's predicted frequency
#   pitch_Hz outside estimate: lowest strong peak of a long-window FFT of the
#            first 0.5 s after the onset (scripts/drum-pitch.py)
#   f01/pitch the ratio; near 1 when tonus's fundamental is the drum's
#   loud_Hz  the strongest peak of that FFT
#   sox_Hz   SoX's `stat` "Rough frequency" (zero crossings; noisy on drums,
#            shown for comparison only)
#   fund_Hz  tonus's own fundamental when it states that the model does not
#            fit (the JSON's diagnosis; "-" for a sound or fair fit)
#   closest  the model whose mode pattern came closest (isotropic or air)
#   decided  "fit": sound or fair, with a measured (0,1) within 5 % of
#            pitch_Hz; "statement": doubtful or unfit, with the statement of
#            what was found; UNDECIDED otherwise
#
# Diameter guesses (areal density 0.26 kg/m2 for every head, a single-ply
# 10 mil film head; real heads differ, and calfskin/goatskin more so):
#   snares 14in; toms "Hi" 10in, "Mid" 12in, "Low" 14in (Millo: tom1_a is
#   its Tom Hi, tom1_1 Tom Mid, tom2_1 Tom Low, per its drumkit.xml);
#   kicks 22in; djembe 13in (a 33 cm head; the "Bass" stroke sounds the
#   body's Helmholtz resonance, not a membrane mode); dunun heads:
#   kenkeni 12in, sangban 15in, dununba 20in; bongos: macho (Hi) 7in,
#   hembra (Lo) 8.5in.
# Left out: cymbals, hi-hats, claps, sticks, cowbells, bells (metal), the
# cajon and other non-membrane samples, VariBreaks' "VP Click" and "VP Drum"
# (unnamed electronic-sounding drums).
set -uo pipefail

dir=${1:-real-drums}
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/.." && pwd)
tonus=${TONUS:-${CARGO_TARGET_DIR:-$root/target}/release/tonus}
timeout_s=${TIMEOUT_S:-10}
sigma=0.26kg/m2

if [ ! -x "$tonus" ]; then
    echo "real-drums: no tonus binary at $tonus; run cargo build --release or set TONUS" >&2
    exit 2
fi
if [ ! -d "$dir" ]; then
    echo "real-drums: no folder $dir; fetch the kits first: bash scripts/fetch-real-drums.sh $dir" >&2
    exit 2
fi
command -v sox >/dev/null || { echo "real-drums: needs sox (apt-get install sox)" >&2; exit 2; }
python3 -c 'import numpy' 2>/dev/null || { echo "real-drums: needs numpy (pip install numpy)" >&2; exit 2; }

# "kit|file|diameter" for every sample measured.
samples() {
    local k
    k="Millo-Drums_v.1"
    echo "$k|snare1.flac|14in"
    echo "$k|snare3.flac|14in"
    echo "$k|tom1_a.flac|10in"
    echo "$k|tom1_1.flac|12in"
    echo "$k|tom2_1.flac|14in"
    echo "$k|bd1.flac|22in"
    k="VariBreaks"
    for i in 1 2 3; do echo "$k|VP Snare $i.flac|14in"; done
    echo "$k|VP Tom Hi.flac|10in"
    echo "$k|VP Tom Mid.flac|12in"
    echo "$k|VP Tom Low.flac|14in"
    for i in 1 2 3; do echo "$k|VP Kick $i.flac|22in"; done
    k="circAfrique v4"
    for i in 1 2 3 4 5; do
        for s in Bass Tone Slap; do echo "$k|Djembe$i $s.wav|13in"; done
    done
    for s in "Head Hit" "Head Mute"; do
        echo "$k|Kenkeni1 $s.wav|12in"
        echo "$k|Sangban1 $s.wav|15in"
        echo "$k|Dununba1 $s.wav|20in"
    done
    k="Gimme A Hand 1.0"
    for v in Softest Soft Med Hard Hardest; do
        echo "$k|BongoHi-$v.wav|7in"
        echo "$k|BongoLo-$v.wav|8.5in"
    done
}

short() {
    case "$1" in
    Millo-Drums_v.1) echo millo ;;
    VariBreaks) echo vari ;;
    "circAfrique v4") echo circ ;;
    "Gimme A Hand 1.0") echo gimme ;;
    *) echo "$1" ;;
    esac
}

tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT

fmt='%-28s %6s %7s %7s %-9s %9s %9s %9s %9s %9s %7s %9s %-10s %s\n'
printf '# tonus %s, %s, timeout %ss, areal density %s\n' \
    "$("$tonus" --version 2>/dev/null | awk '{print $2}')" "$(date -u +%Y-%m-%dT%H:%MZ)" "$timeout_s" "$sigma"
printf "$fmt" sample D wall_s exit grade T_N/m f01_Hz pitch_Hz f01/pitch loud_Hz sox_Hz fund_Hz closest decided
n=0
failed=0
undecided=0
slow=0
: >"$tmp/times"
while IFS='|' read -r kit file diam; do
    if [ -n "${ONLY:-}" ] && ! [[ "$kit/$file" =~ $ONLY ]]; then
        continue
    fi
    f="$dir/$kit/$file"
    name="$(short "$kit")/$file"
    if [ ! -f "$f" ]; then
        printf "$fmt" "$name" "$diam" - MISSING - - - - - - - - - -
        failed=$((failed + 1))
        continue
    fi
    n=$((n + 1))
    t0=$(date +%s.%N)
    timeout "$timeout_s" "$tonus" fit "$f" --diameter "$diam" --areal-density "$sigma" --json \
        >"$tmp/out.json" 2>"$tmp/err.txt"
    rc=$?
    t1=$(date +%s.%N)
    wall=$(awk -v a="$t0" -v b="$t1" 'BEGIN { printf "%.2f", b - a }')
    read -r pitch loud _onset < <(python3 "$here/drum-pitch.py" "$f" 2>/dev/null || echo "nan nan nan")
    soxhz=$(sox "$f" -n stat 2>&1 | awk '/Rough/ { print $3 }')
    if [ "$rc" -eq 124 ]; then
        exit_s=TIMEOUT
        read -r grade tension f01 fund closest <<<"- - - - -"
        failed=$((failed + 1))
    else
        exit_s=$rc
        read -r grade tension f01 fund closest < <(python3 - "$tmp/out.json" "$tmp/err.txt" <<'PY'
import json, sys
try:
    d = json.load(open(sys.argv[1]))
except Exception:
    err = open(sys.argv[2]).read().strip().replace(" ", "_")
    print("error:" + err[:60].split(";")[0][-40:], "-", "-", "-", "-")
    sys.exit()
grade = d["quality"]["grade"]
t = d["tension"]["value"]
f01 = next((m["measured_hz"] for m in d["modes"] if m.get("m") == 0 and m.get("n") == 1
            and m.get("measured_hz") is not None), None)
if f01 is not None:
    f01s = "%.1f" % f01
else:
    p = next((m["predicted_hz"] for m in d.get("missing_modes") or [] if m.get("labels") == "(0,1)"), None)
    f01s = "%.1fp" % p if p is not None else "-"
diag = d.get("diagnosis")
fund = "%.1f" % diag["fundamental_hz"] if diag else "-"
closest = diag["closest_model"] if diag and diag.get("closest_model") else "-"
print(grade, "%.0f" % t, f01s, fund, closest)
PY
)
        [ "$rc" -eq 2 ] && failed=$((failed + 1))
    fi
    ratio=$(awk -v a="${f01%p}" -v b="$pitch" 'BEGIN { if (a + 0 > 0 && b + 0 > 0) printf "%.2f", a / b; else print "-" }')
    # Decided honestly: a sound or fair fit whose measured (0,1) is within
    # 5 % of the outside pitch, or a doubtful/unfit grade with the statement
    # of what was found (fundamental, overtones, closest model).
    case "$grade" in
    sound | fair)
        if [[ "$f01" != *p ]] && awk -v r="$ratio" 'BEGIN { exit !(r + 0 > 0.95 && r + 0 < 1.05) }'; then
            decided="fit"
        else
            decided="UNDECIDED"
        fi
        ;;
    doubtful | unfit)
        if [ "$closest" != "-" ]; then decided="statement"; else decided="UNDECIDED"; fi
        ;;
    *) decided="UNDECIDED" ;;
    esac
    [ "$decided" = UNDECIDED ] && undecided=$((undecided + 1))
    awk -v w="$wall" 'BEGIN { exit !(w + 0 > 0.5) }' && slow=$((slow + 1))
    printf "$fmt" "$name" "$diam" "$wall" "$exit_s" "$grade" "$tension" "$f01" "$pitch" "$ratio" "$loud" "$soxhz" "$fund" "$closest" "$decided"
    echo "$wall $name" >>"$tmp/times"
done < <(samples)

echo
echo "# $n samples run, $failed failed (error exit 2, TIMEOUT or missing), $undecided not decided honestly, $slow over 0.5 s."
echo "# Slowest runs (wall s):"
sort -rn "$tmp/times" | head -8 | sed 's/^/#   /'
