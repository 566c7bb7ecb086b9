# plumbline build, test and benchmark targets. `make test` is the README's
# test command and what CI runs: it starts the real servers the tests need.
GO ?= go

.PHONY: build test test-unit bench bench-detect fuzz vet

build:
	$(GO) build -o bin/plumbline ./daemon

# The whole suite against real Mosquitto and InfluxDB servers, installed
# and started by scripts/testenv.sh.
test:
	$(GO) vet ./...
	scripts/testenv.sh $(GO) test -count=1 -timeout 20m ./...

bench:
	$(GO) test -run '^$$' -bench . -benchmem -timeout 30m ./...

# Detection benchmark: every scenario of testdata/scenarios/suite.tsv in
# the exact and the realistic condition, simulate -> replay -> score, one
# table per condition beside the targets (scripts/bench-detect.sh).
bench-detect:
	GO=$(GO) scripts/bench-detect.sh

vet:
	$(GO) vet ./...
