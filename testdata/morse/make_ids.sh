#!/bin/sh
# Known-identifier bursts for the template matcher (ident/template_test.go):
# Debian's ebook2cw 0.8.4 (Fabian Kurz, DJ1YFK) keys the tone (A2A-style
# on/off keyed audio) and writes Ogg/Vorbis; sox 14.4.2 converts it to
# 8 kHz 8-bit unsigned mono PCM WAV (-D: no dither, so the output is
# repeatable byte for byte). IDs are invented placeholders
# (N0CALL/1..5 on the test's list, N0CALL/9 deliberately unlisted).
# Run from testdata/morse:  sh make_ids.sh [OUTDIR]   (default: ids)
# Every ebook2cw parameter is given on the command line; -E /dev/null stands
# for the configuration file and -p turns off the paragraph <BT>.
set -eu
out=${1:-ids}
mkdir -p "$out"
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
gen() { # name wpm freq text
    name=$1 wpm=$2 freq=$3 text=$4
    printf '%s\n' "$text" | ebook2cw -E /dev/null -p -w "$wpm" -f "$freq" -s 8000 \
        -R 50 -F 50 -T 0 -O -o "$tmp/$name" >/dev/null 2>&1
    sox -D "$tmp/${name}0000.ogg" -b 8 -e unsigned-integer -c 1 -r 8000 "$out/$name.wav"
    printf '%s\t%s\t%s\t%s\n' "$name.wav" "$wpm" "$freq" "$text" >>"$out/ids.tsv"
}
printf 'file\twpm\tfreq_hz\ttext\n' >"$out/ids.tsv"
gen id1_w25_f800  25 800  "N0CALL/1 N0CALL/1"
gen id2_w12_f700  12 700  "N0CALL/2"
gen id3_w20_f1000 20 1000 "N0CALL/3 N0CALL/3"
gen id4_w15_f600  15 600  "N0CALL/4"
gen id5_w22_f900  22 900  "N0CALL/5 N0CALL/5"
gen id9_w18_f750  18 750  "N0CALL/9 N0CALL/9"
