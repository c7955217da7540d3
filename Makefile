# tauvox — quantitative MR relaxometry. Needs only Go (see README.md).
GO      ?= go
BIN     := bin/tauvox
PKGS    := ./...
BENCHTIME ?= 2s

.PHONY: all build test test-race lint vet bench bench-peers bench-memory demo fuzz clean slurm-test

all: build

build:
	$(GO) build -o $(BIN) ./cmd/tauvox

# make test: vet, the formatting check and every test (times in README.md).
test: lint vet
	$(GO) test -count=1 $(PKGS)

# make test-race: every test under the race detector (several times slower;
# .ci/run runs it after make test).
test-race:
	$(GO) test -race -count=1 -timeout 30m $(PKGS)

vet:
	$(GO) vet $(PKGS)

# lint fails when gofmt would change a file.
lint:
	@out=$$(gofmt -l $$(find . -name '*.go' -not -path './.git/*')); \
	if [ -n "$$out" ]; then echo "gofmt would change:"; echo "$$out"; exit 1; fi

# make slurm-test: start a single-node SLURM from Debian's packages (as
# root; installs them when missing), run the array script of
# `tauvox batch --slurm-script` over testdata/bids and compare with a plain
# batch run (.ci/slurm-test.sh; also run by .ci/run).
slurm-test:
	timeout 900 .ci/slurm-test.sh

# make bench: the engine and per-voxel benchmarks on two workers; results
# and method in docs/benchmarks.md.
bench:
	$(GO) test -run '^$$' -bench . -benchtime $(BENCHTIME) -benchmem ./fit/ ./io/nifti/ ./io/dicom/ ./io/gzsplit/ ./io/gzruns/ ./io/preview/

# make bench-peers: tauvox against a scipy curve_fit voxel loop and a numpy
# log-linear script on the same generated files, then a pydicom + numpy
# script on a 288-file DICOM series and the same series as .nii.gz (needs
# Debian python3-numpy, python3-scipy, python3-nibabel, python3-pydicom);
# results in docs/benchmarks.md.
bench-peers: build
	/usr/bin/python3 testdata/gen/peers_bench.py --tauvox $(BIN)
	/usr/bin/python3 testdata/gen/dicom_peers_bench.py --tauvox $(BIN)

# make bench-memory: peak RSS of tauvox fit on a 256x256x40x16 series and on
# a generated 512x512x280x32 float32 series (9.4 GB; needs about 12 GB free
# in MEMDIR, removed afterwards). Slow: run it once.
MEMDIR ?= /tmp
bench-memory: build
	/usr/bin/python3 testdata/gen/memory_bench.py --tauvox $(BIN) --dir $(MEMDIR)

# make demo: simulate the invented demo phantom, fit T2 and T1, print the
# per-vial results.
demo: build
	$(BIN) demo --out out/demo --force

# make fuzz: every parser's fuzz target in turn for FUZZTIME each (CI: 10s;
# the 10-minute runs and their execution counts are in docs/robustness.md).
# FUZZPARALLEL workers per target (default: one per CPU).
FUZZTIME ?= 30s
FUZZPARALLEL ?= 0
# FUZZMINIMIZE bounds the time spent minimising each new input: the slow
# targets (they write files or a database) otherwise overrun a short
# FUZZTIME while minimising and go test reports "context deadline exceeded".
FUZZMINIMIZE ?= 1s
FUZZ_TARGETS := \
	./io/nifti/:FuzzDecode \
	./io/nifti/:FuzzDecodeGzip \
	./io/gzsplit/:FuzzDecode \
	./io/nifti/:FuzzSplitRead \
	./io/gzruns/:FuzzRoundTrip \
	./io/sidecar/:FuzzRead \
	./io/dicom/:FuzzReadHeader \
	./io/dicom/:FuzzSeries \
	./io/dicom/:FuzzRLE \
	./io/dicom/:FuzzLosslessJPEG \
	./roi/:FuzzParseList \
	./roi/phantom/:FuzzParse \
	./roi/history/:FuzzParseQA \
	./roi/history/:FuzzOpen
# Each target runs through .ci/fuzz-target.sh, which retries once a run
# that ends with Go 1.26's fuzztime deadline race and no failing input.
fuzz:
	@set -e; for t in $(FUZZ_TARGETS); do \
		pkg=$${t%%:*}; fn=$${t##*:}; \
		echo "fuzz $$fn ($$pkg) for $(FUZZTIME)"; \
		GO=$(GO) .ci/fuzz-target.sh $$pkg $$fn $(FUZZTIME) $(FUZZMINIMIZE) $(FUZZPARALLEL); \
	done

clean:
	rm -rf bin out
