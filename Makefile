# tauvox — quantitative MR relaxometry. Needs only Go (see README.md).
GO      ?= go
BIN     := bin/tauvox
PKGS    := ./...
BENCHTIME ?= 2s

.PHONY: all build test lint vet bench demo fuzz clean

all: build

build:
	$(GO) build -o $(BIN) ./cmd/tauvox

# make test: vet, the formatting check and every test (race detector on).
test: lint vet
	$(GO) test -race -count=1 $(PKGS)

vet:
	$(GO) vet $(PKGS)

# lint fails when gofmt would change a file.
lint:
	@out=$$(gofmt -l $$(find . -name '*.go' -not -path './.git/*')); \
	if [ -n "$$out" ]; then echo "gofmt would change:"; echo "$$out"; exit 1; fi

# make bench: the engine and per-voxel benchmarks on two workers; results
# and method in docs/benchmarks.md.
bench:
	$(GO) test -run '^$$' -bench . -benchtime $(BENCHTIME) -benchmem ./fit/ ./io/nifti/ ./io/dicom/

# make demo: simulate the invented demo phantom, fit T2 and T1, print the
# per-vial results.
demo: build
	$(BIN) demo --out out/demo --force

FUZZTIME ?= 30s
fuzz:
	$(GO) test -run '^$$' -fuzz '^FuzzDecode$$' -fuzztime $(FUZZTIME) ./io/nifti/
	$(GO) test -run '^$$' -fuzz '^FuzzRead$$' -fuzztime $(FUZZTIME) ./io/sidecar/
	$(GO) test -run '^$$' -fuzz '^FuzzReadHeader$$' -fuzztime $(FUZZTIME) ./io/dicom/

clean:
	rm -rf bin out
