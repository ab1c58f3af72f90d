#!/bin/sh
# Writes fingerprint-default.txt: the SHA-256 (GNU coreutils sha256sum) of
# the canonical encoding of DefaultSeries() described in
# (*Series).Fingerprint. TestFingerprintPinned compares against it, so the
# fingerprint of the default settings can never change by accident.
# Run from config/testdata: sh fingerprint.sh
set -eu
printf 'forewarn-series-v1\nkind=gauge\nstep=60000000000\nhorizon=60\nlevels=50,90\nwindow=2000\nmin_points=50\nrefit_every=60\nmodel=auto\ntransform=auto\nclose_after=0\n' |
	sha256sum | cut -d' ' -f1 >fingerprint-default.txt
echo "# $(sha256sum --version | head -1)" >>fingerprint-default.txt
