#!/bin/sh
# Redraws every picture in docs/img from the current code, with the commands
# the docs give under each picture (PNG at the default 150 dpi). Run from the
# repository root after a build:
#   sh docs/img/regenerate.sh [path/to/pondus]
# The report screenshot needs headless Chromium (Debian's chromium package);
# it is skipped with a message without it. Every output goes to docs/img/;
# the report page is written into a temporary directory first.
set -eu
P=${1:-target/debug/pondus}
I=docs/img
D=data-examples
q() { "$P" "$@" > /dev/null; }

# docs/plots.md
q fit $D/consortium-correlations.csv --measure r --moderator mode --forest $I/forest-consortium-by-mode.png
q fit $D/trial-events.csv --measure log-or --forest $I/forest-trials-sorted.png --sort effect
q fit $D/published-slopes.csv --measure slope --moderator mean_age --forest $I/forest-slopes-fitted.png --sort mean_age --show-fitted
q fit $D/consortium-correlations.csv --measure r --moderator session_minutes --bubble $I/bubble-consortium-minutes.png
q fit $D/programme-sites.csv --measure smd --moderator dosage_hours --moderator delivery --interaction dosage_hours,delivery --bubble $I/bubble-programme-delivery.png
q fit $D/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --bubble $I/bubble-consortium-mode.png --bubble-x mode
q fit $D/consortium-correlations.csv --measure r --moderator session_minutes --spread-by mode --bubble $I/bubble-consortium-spread.png
q fit $D/programme-sites.csv --measure smd --moderator dosage_hours --bubble $I/bubble-programme-dosage.png
q fit $D/trial-events.csv --measure log-or --funnel $I/funnel-trials-contours.png --contours
q fit $D/consortium-correlations.csv --measure r --moderator session_minutes --funnel $I/funnel-consortium-residuals.png
q fit $D/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --influence -q --influence-plot $I/influence-consortium.png

# docs/interpretation.md (also shown in the tutorial)
q fit $D/consortium-correlations.csv --measure r --moderator session_minutes --moderator mode --regions --bubble $I/bubble-consortium-regions.png

# docs/tutorial.md (the commands of sections A4, A5 and C3, into docs/img)
q fit $D/hiring-validity.csv --measure r --loo --influence --small-study --funnel $I/tutorial-hiring-funnel.png
q fit $D/hiring-validity.csv --measure r --small-study --selection 0.025 --sensitivity-plot $I/tutorial-hiring-sensitivity.png
q fit $D/programme-sites.csv --measure smd --moderator dosage_hours --moderator delivery --forest $I/tutorial-programme-forest.png

# docs/tutorial.md section D: the top of the report page, 1000 × 1300 pixels.
if command -v chromium > /dev/null 2>&1; then
    T=$(mktemp -d)
    q fit $D/programme-sites.csv --measure smd --moderator dosage_hours --moderator delivery \
        --at dosage_hours=40,delivery=volunteer --probe dosage_hours --report "$T/programme.html"
    chromium --headless --no-sandbox --disable-gpu --no-first-run --disable-background-networking \
        --disable-component-update --disable-sync --hide-scrollbars --force-device-scale-factor=1 \
        --user-data-dir="$T/profile" --window-size=1000,1300 --screenshot="$T/shot.png" \
        "file://$T/programme.html" > /dev/null 2>&1
    cp "$T/shot.png" $I/tutorial-report.png
    rm -r "$T"
else
    echo "no chromium: $I/tutorial-report.png not redrawn" >&2
fi
