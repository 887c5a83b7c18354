#!/bin/sh
# Rebuilds every planted-scenario fixture and the embedded demo assets.
#
# Run from the repository root:   sh testdata/planted/make_all.sh
# Set CHECK=1 to print each seed's permutation-importance table as well.
#
# Needs Debian's python3-xgboost 1.7.4 (and python3-sklearn 1.2.1 for
# CHECK=1) at /usr/bin/python3, and Go. The traffic CSV files are converted
# to Parquet (Snappy, dictionary-encoded doubles) and then deleted.
set -eu

PYTHON=${PYTHON:-/usr/bin/python3}
# Searches per traffic week: enough that a feature the model barely uses has
# an interval tight enough to be named a removal candidate.
SEARCHES=${SEARCHES:-960}
here=testdata/planted
demo=storage/demo/assets

if [ ! -f "$here/make_planted.py" ]; then
	echo "make_all.sh: run from the repository root" >&2
	exit 2
fi

for seed in 1 2 3 4 5; do
	out=$here/seed$seed
	mkdir -p "$out"
	if [ "${CHECK:-}" = 1 ]; then
		"$PYTHON" "$here/make_planted.py" --seed "$seed" --out "$out" --traffic-searches "$SEARCHES" --check
	else
		"$PYTHON" "$here/make_planted.py" --seed "$seed" --out "$out" --traffic-searches "$SEARCHES"
	fi
	for week in baseline candidate; do
		go run ./testdata/tools/csv2parquet -dict \
			"$out/traffic_$week.csv" "$out/traffic_$week.parquet"
		rm "$out/traffic_$week.csv"
	done
done

# The demo is seed 1, byte for byte (git stores the identical files once).
mkdir -p "$demo"
for f in baseline.json.gz candidate.json.gz traffic_baseline.parquet \
	traffic_candidate.parquet costs.csv truth.json; do
	cp "$here/seed1/$f" "$demo/$f"
done
