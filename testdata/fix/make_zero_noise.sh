#!/bin/sh
# Regenerates zero_noise_geodsolve.txt: exact (noise-free) bearings from
# stations to a known transmitter, computed by GeographicLib's GeodSolve
# (geographiclib-tools, GeodSolve 2.1.2, WGS84 default ellipsoid).
#
# Each station is placed with the direct problem from the truth point
#   echo "LAT LON AZI DIST" | GeodSolve -p 9        -> "lat2 lon2 azi2"
# and its bearing to the truth is the inverse problem
#   echo "SLAT SLON LAT LON" | GeodSolve -i -p 9    -> "azi1 azi2 s12"
# Output lines: case truth_lat truth_lon station_lat station_lon bearing_deg
# Run: sh make_zero_noise.sh > zero_noise_geodsolve.txt
set -eu
emit() { # case lat lon "azi dist" ...
  c=$1; lat=$2; lon=$3; shift 3
  for ad in "$@"; do
    set -- $ad
    st=$(echo "$lat $lon $1 $2" | GeodSolve -p 9)
    slat=$(echo "$st" | awk '{print $1}'); slon=$(echo "$st" | awk '{print $2}')
    brg=$(echo "$slat $slon $lat $lon" | GeodSolve -i -p 9 | awk '{print $1}')
    echo "$c $lat $lon $slat $slon $brg"
  done
}
echo "# case truth_lat truth_lon station_lat station_lon bearing_deg (GeodSolve 2.1.2, WGS84)"
# short range, about 1 km
emit short1 52.2 5.1 "20 800" "140 1100" "260 950"
emit short2 -33.9 151.2 "0 1200" "95 700" "200 1000" "300 1300"
# long range, about 200 km
emit long1 45.5 -73.6 "30 180000" "150 210000" "275 200000"
emit long2 64.1 -21.9 "80 190000" "200 220000"
# across the antimeridian, 50 km
emit dateline -17.8 179.95 "60 50000" "300 45000" "180 52000"
