# pickwise: build, test and demo. Every target installs what it needs.
GO      ?= go
BIN     := bin/pickwise
GOFLAGS ?= -mod=mod
export GOFLAGS

.PHONY: all build test demo bench deps clp glpk clean

all: build

# deps installs the C libraries and tools pickwise needs: COIN-OR CLP (to
# build) and GLPK's glpsol (for the cross-check test).
deps: clp glpk

# SUDO is empty as root, "sudo" otherwise.
SUDO := $(shell [ "$$(id -u)" = 0 ] || echo sudo)

clp:
	@if pkg-config --exists clp 2>/dev/null; then :; \
	elif command -v apt-get >/dev/null 2>&1; then \
		echo "installing COIN-OR CLP (coinor-libclp-dev) with apt-get"; \
		$(SUDO) apt-get update -qq && \
		DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y -qq coinor-libclp-dev pkg-config >/dev/null; \
	elif command -v brew >/dev/null 2>&1; then \
		echo "installing COIN-OR CLP with brew"; brew install clp pkg-config; \
	else \
		echo "pickwise needs COIN-OR CLP: install the package that provides 'pkg-config clp' (Debian: coinor-libclp-dev; macOS: brew install clp)" >&2; exit 1; \
	fi

glpk:
	@if command -v glpsol >/dev/null 2>&1; then :; \
	elif command -v apt-get >/dev/null 2>&1; then \
		echo "installing GLPK (glpk-utils) with apt-get"; \
		$(SUDO) apt-get update -qq && \
		DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y -qq glpk-utils >/dev/null; \
	elif command -v brew >/dev/null 2>&1; then \
		brew install glpk; \
	else \
		echo "note: glpsol not found; the GLPK cross-check test will be skipped" >&2; \
	fi

build: clp
	$(GO) build -o $(BIN) ./cmd/pickwise

test: deps
	$(GO) vet ./...
	$(GO) test -count=1 -timeout 40m ./...

demo: build
	./$(BIN) demo

# bench runs the Go benchmarks once each, then the scale cases side by side
# with the direct LP, and writes bench/results.md. Constraint generation
# stops after 120 s (the four-channel target; five channels: 240 s, their
# 300 s target less the certificate's time) with the certified interval it
# reached.
bench: deps build
	$(GO) test -run '^$$' -bench . -benchtime 1x -timeout 60m ./...
	$(GO) run ./cmd/pickwise-bench -pickwise $(BIN) -o bench/results.md -timeout 7m -cg-limit 120s

clean:
	rm -rf bin pickwise-demo
