# failframe: build, test and demo. `make demo` and `make test` work on a fresh
# Debian machine: `deps` installs what is missing.
SHELL := /bin/bash
GO ?= go
BIN := bin/failframe
DEMO := demo-out
SUDO := $(shell [ "$$(id -u)" = 0 ] || echo sudo)
APT_PKGS := libopencv-dev ffmpeg pkg-config python3-opencv python3-numpy chromium

.PHONY: deps build test vet demo bench screenshots clean

# deps installs Debian's OpenCV, ffmpeg, the Python binding of OpenCV (an
# independent check in the tests) and Chromium (browser tests) when missing.
deps:
	@missing=""; \
	pkg-config --exists opencv4 2>/dev/null || missing="$$missing libopencv-dev pkg-config"; \
	command -v ffmpeg >/dev/null || missing="$$missing ffmpeg"; \
	/usr/bin/python3 -c 'import cv2' 2>/dev/null || missing="$$missing python3-opencv python3-numpy"; \
	command -v chromium >/dev/null || missing="$$missing chromium"; \
	if [ -n "$$missing" ]; then \
		echo "deps: installing$$missing"; \
		$(SUDO) apt-get update -qq && \
		DEBIAN_FRONTEND=noninteractive $(SUDO) apt-get install -y -qq $$missing >/dev/null; \
	fi

build: deps
	$(GO) build -o $(BIN) ./cmd/failframe

vet: deps
	$(GO) vet ./...

test: build vet
	$(GO) test -timeout 20m ./...
	$(GO) test -run '^$$' -fuzz FuzzParse -fuzztime 20s -fuzzminimizetime 200x ./report/loadlog

demo: build
	@rm -rf $(DEMO)
	$(BIN) synth --out $(DEMO)/clip --seed 7
	$(BIN) analyze $(DEMO)/clip/tower.avi --marks $(DEMO)/clip/marks.yaml --load $(DEMO)/clip/load.csv --mass-g 21.4 --out $(DEMO)/report
	@echo "demo report: $(DEMO)/report/report.html"

bench: build
	$(GO) test -run '^$$' -bench . -benchtime 1x ./capture/... ./tracking/...
	bash testdata/bench/analyze.sh

screenshots: build
	$(GO) test -run TestReviewScreenshots ./report/review -screenshots $(CURDIR)/screenshots

clean:
	rm -rf bin $(DEMO) screenshots
