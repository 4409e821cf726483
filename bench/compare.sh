#!/bin/sh
# compare.sh: rhomb against gonum and against numpy (OpenBLAS), on the same
# machine, interleaved: each round runs the Go benchmarks and then the numpy
# script, so that a change in what else the machine is doing hits both.
# Prints every round's raw lines; compare figures from the same round.
# Compare numpy's step with BenchmarkStep: both time steps back to back,
# and both report a mean (numpy_step.py also prints its best round).
# BenchmarkRatio's rhomb figure is a cold one (see bench/doc.go).
#
#   sh bench/compare.sh [rounds]    (from the repository root; default 3)
#
# With RHOMB_OPENDATA set to the folder .ci/fetch-data fills, each round
# also runs one Fashion-MNIST epoch through the trainer
# (BenchmarkFashionEpoch) and the same epoch in numpy (numpy_epoch.py).
#
# Needs python3 with numpy (Debian: apt-get install python3-numpy
# libopenblas0-pthread; set PYTHON to choose the interpreter). OPENBLAS_CORETYPE and OPENBLAS_L2_SIZE are unset for
# the numpy command only, so that OpenBLAS detects the processor itself.
set -e
rounds=${1:-3}
bin=$(mktemp -d)/bench.test
go test -c -o "$bin" ./bench/
i=1
while [ "$i" -le "$rounds" ]; do
	echo "== round $i"
	(cd bench && "$bin" -test.run '^$' -test.bench '^(BenchmarkPeak|BenchmarkRatio|BenchmarkGemmSquare)$' -test.benchtime 20x -test.cpu 1,2 | grep -E '^Benchmark')
	# 250 steps, as many as numpy_step.py times (five rounds of 50).
	(cd bench && "$bin" -test.run '^$' -test.bench '^BenchmarkStep$' -test.benchtime 250x -test.cpu 1,2 | grep -E '^Benchmark')
	env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE "${PYTHON:-python3}" bench/numpy_step.py
	if [ -n "$RHOMB_OPENDATA" ]; then
		(cd bench && "$bin" -test.run '^$' -test.bench '^BenchmarkFashionEpoch$' -test.benchtime 1x | grep -E '^Benchmark')
		env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE "${PYTHON:-python3}" bench/numpy_epoch.py "$RHOMB_OPENDATA"
	fi
	i=$((i + 1))
done
rm -f "$bin"
