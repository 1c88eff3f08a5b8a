#!/bin/sh
# Clean Morse reference audio from an independent generator: Debian's
# ebook2cw 0.8.4 (Fabian Kurz, DJ1YFK) writes Ogg/Vorbis; sox 14.4.2
# converts it to 6 kHz 16-bit mono PCM WAV. Texts are invented test strings.
# Run from testdata/morse:  sh make_clean.sh
# Every ebook2cw parameter is given on the command line and -E /dev/null
# stands for the configuration file, so ~/.ebook2cw has no say
# (the user file is still read first, but each setting it holds is overridden
# here: -w -f -s -R -F -T; -p turns off the paragraph <BT>).
set -eu
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
gen() { # name wpm effwpm freq text
    name=$1 wpm=$2 eff=$3 freq=$4 text=$5
    if [ "$eff" = 0 ]; then effopt=""; else effopt="-e $eff"; fi
    printf '%s\n' "$text" | ebook2cw -E /dev/null -p -w "$wpm" $effopt -f "$freq" -s 6000 \
        -R 50 -F 50 -T 0 -O -o "$tmp/$name" >/dev/null 2>&1
    sox "$tmp/${name}0000.ogg" -b 16 -e signed-integer -c 1 -r 6000 "$name.wav"
    printf '%s\t%s\t%s\t%s\t%s\n' "$name.wav" "$wpm" "$eff" "$freq" "$text" >>clean.tsv
}
printf 'file\twpm\teffwpm\tfreq_hz\ttext\n' >clean.tsv
gen clean_w10_f600   10 0  600  "TEST 73"
gen clean_w10_f1500  10 0  1500 "R 5NN"
gen clean_w15_f800   15 0  800  "KX9 /?="
gen clean_w15_f1000  15 0  1000 "AGE 48, -."
gen clean_w20_f1000  20 0  1000 "N0CALL/1"
gen clean_w20_f800   20 0  800  "<AR> <SK> <KN> <AS>"
gen clean_w25_f1500  25 0  1500 "QZJXV BWMKD"
gen clean_w25_f600   25 0  600  "1234567890"
gen clean_w20_e10_f700 20 10 700 "FHY LUG"
gen clean_w25_e15_f900 25 15 900 "OIR 6TP"
# A wandering tone: ebook2cw's in-text |f command moves the pitch by 60 Hz
# at each word (700 -> 880 Hz over the file).
gen wander_w20_f700_880 20 0 700 "TEST |f760 TEST |f820 TEST |f880 TEST"
