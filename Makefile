# tracelift: two commands do all set-up on a fresh Debian 12 machine.
#   make run   installs what the desktop app needs, builds it, opens it on the demo
#   make test  installs the same plus the test checkers, then vets and tests

SHELL := /bin/bash
GO ?= go
export PATH := /usr/local/go/bin:$(PATH)

RUN_PKGS  := libopencv-dev pkg-config libgl1-mesa-dev xorg-dev
TEST_PKGS := $(RUN_PKGS) xvfb xdotool imagemagick biosig-tools poppler-utils python3-scipy

# Install Debian packages only when one is missing (apt-get update first).
define apt_ensure
	@missing=""; for p in $(1); do dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q "ok installed" || missing="$$missing $$p"; done; \
	if [ -n "$$missing" ]; then \
	  echo "installing:$$missing"; \
	  SUDO=""; [ "$$(id -u)" = 0 ] || SUDO=sudo; \
	  $$SUDO apt-get update -qq && DEBIAN_FRONTEND=noninteractive $$SUDO apt-get install -y -qq $$missing >/dev/null; \
	fi
endef

.PHONY: run test deps-run deps-test build cli bench fuzz demo clean

deps-run:
	$(call apt_ensure,$(RUN_PKGS))

deps-test:
	$(call apt_ensure,$(TEST_PKGS))

build: deps-run
	$(GO) build -o bin/tracelift ./cmd/tracelift
	$(GO) build -o bin/tracelift-cli ./cmd/tracelift-cli

cli: deps-run
	$(GO) build -o bin/tracelift-cli ./cmd/tracelift-cli

run: build
	./bin/tracelift

test: deps-test
	$(GO) vet ./...
	$(GO) test -timeout 25m ./...
	$(MAKE) --no-print-directory fuzz FUZZTIME=3s

# Each fuzz target runs briefly; FUZZTIME=10m for a longer run. A failure
# counts only when its input fails again as an ordinary test (see .ci/fuzz).
FUZZTIME ?= 3s
fuzz:
	@GO=$(GO) FUZZTIME=$(FUZZTIME) ./.ci/fuzz

bench: cli
	./bin/tracelift-cli bench

clean:
	rm -rf bin
