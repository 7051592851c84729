# Developer targets for rolloff.
#
#   make test          the whole test suite (the README's command)
#   make reliability   the fault, crash and bad-input suite, ending with one
#                      summary line of what it observed
#   make fuzz          every fuzz target for FUZZTIME each (default 10s)
#   make lint          gofmt -l, go vet and, when installed, staticcheck
#   make battery       the analysis' reference battery (testdata/battery):
#                      every design, density, grid and noise level; prints
#                      the table and fails when a target is missed
#   make coverage      the corners' k = 2 intervals against the truth over
#                      COVERAGE_RUNS (default 200) seeded sweeps of the
#                      imperfect simulated demo bench
#   make battery-regress  the same battery, failing only when a figure is
#                      worse than recorded in testdata/battery/reached.json
#                      (each target printed as met or not met); CI runs it
#   make battery-update   rewrites reached.json from a run (after a gain)

SHELL := /bin/bash
GO ?= go
FUZZTIME ?= 10s
STATICCHECK ?= $(shell $(GO) env GOPATH)/bin/staticcheck

.PHONY: test reliability fuzz lint battery battery-regress battery-update coverage

COVERAGE_RUNS ?= 200

test:
	$(GO) test ./...

reliability:
	@summary=$$(mktemp); out=$$(mktemp); \
	ROLLOFF_RELIABILITY_SUMMARY=$$summary $(GO) test ./sweep/reliability/ -count=1 -v 2>&1 | tee $$out; \
	status=$${PIPESTATUS[0]}; \
	skipped=$$(grep -c -- '--- SKIP: ' $$out); \
	if [ -s $$summary ]; then echo "$$(cat $$summary), tests skipped $$skipped"; \
	else echo "reliability: no summary: the suite did not run to its end (tests skipped $$skipped)"; fi; \
	rm -f $$summary $$out; \
	exit $$status

fuzz:
	bash .ci/fuzz $(FUZZTIME)

battery:
	ROLLOFF_BATTERY=1 $(GO) test ./sweep/analysis/ -run '^TestBattery$$' -count=1 -timeout 60m

coverage:
	ROLLOFF_COVERAGE_RUNS=$(COVERAGE_RUNS) $(GO) test ./sweep/sched/finish/ -run '^TestCoverage$$' -count=1 -v -timeout 90m

battery-regress:
	ROLLOFF_BATTERY_REGRESS=1 $(GO) test ./sweep/analysis/ -run '^TestBatteryRegress$$' -count=1 -timeout 60m -v

battery-update:
	ROLLOFF_BATTERY_REGRESS=update $(GO) test ./sweep/analysis/ -run '^TestBatteryRegress$$' -count=1 -timeout 60m -v

lint:
	@files=$$(gofmt -l .); \
	if [ -n "$$files" ]; then echo "gofmt -l: not formatted:"; echo "$$files"; exit 1; fi
	$(GO) vet ./...
	@if [ -x "$(STATICCHECK)" ]; then \
		echo "$(STATICCHECK) ./..."; $(STATICCHECK) ./...; \
	elif command -v staticcheck >/dev/null 2>&1; then \
		echo "staticcheck ./..."; staticcheck ./...; \
	else \
		echo "staticcheck not installed: skipped"; \
	fi
