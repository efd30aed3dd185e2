# nbledger: the two commands of the README, and the steps they are made of.
#   make demo   builds the demo end to end (installs first if needed)
#   make test   installs everything and runs the tests

PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
OUT := demo_out
# System libraries WeasyPrint (the PDF report) needs, and fonts for pictures.
SYSTEM_PACKAGES := libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz0b fonts-dejavu-core

.PHONY: demo test install system-packages benchmark clean

install: $(STAMP)

system-packages:
	@missing=""; for p in $(SYSTEM_PACKAGES); do dpkg -s $$p >/dev/null 2>&1 || missing="$$missing $$p"; done; \
	if [ -n "$$missing" ]; then \
		echo "installing system packages:$$missing"; \
		if [ "$$(id -u)" = 0 ]; then SUDO=""; else SUDO="sudo"; fi; \
		$$SUDO apt-get update -qq && $$SUDO apt-get install -y -qq $$missing; \
	fi

$(STAMP): pyproject.toml | system-packages
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install --quiet --upgrade pip
	$(BIN)/python -m pip install --quiet -e '.[test]'
	touch $(STAMP)

test: install
	$(BIN)/python -m pytest -q

demo: install
	$(BIN)/python demo_corpus/generate.py --check
	$(BIN)/python demo_corpus/split.py --out $(OUT)
	$(BIN)/nbledger train $(OUT)/train.csv --text-col text --label-col label --normal-class ok \
		--holdout 0.2 --seed 7 --out $(OUT)/tideway.skops
	$(BIN)/nbledger why $(OUT)/tideway.skops --file demo_corpus/examples/parcel_fee.txt
	$(BIN)/nbledger why $(OUT)/tideway.skops --file demo_corpus/examples/raffle_prize.txt --threshold 0.9
	$(BIN)/nbledger why $(OUT)/tideway.skops --file demo_corpus/examples/parcel_fee.txt --format json > $(OUT)/why_parcel_fee.json
	$(BIN)/nbledger vocab $(OUT)/tideway.skops --data $(OUT)/train.csv --text-col text --label-col label \
		--watchlist demo_corpus/examples/watchlist.txt --redact --top 15 --images $(OUT)/vocab
	$(BIN)/nbledger vocab $(OUT)/tideway.skops --format json --out $(OUT)/vocab.json
	$(BIN)/nbledger assess $(OUT)/tideway.skops $(OUT)/test.csv --text-col text --label-col label \
		--costs 10:1 --images $(OUT)/assess
	$(BIN)/nbledger assess $(OUT)/tideway.skops $(OUT)/test.csv --text-col text --label-col label \
		--format json --out $(OUT)/assess.json
	@echo "demo outputs are in $(OUT)/"

benchmark: install
	$(BIN)/python -m benchmarks.bench_evidence
	$(BIN)/python -m benchmarks.bench_vocab
	$(BIN)/python -m benchmarks.bench_assess
	$(BIN)/python -m benchmarks.bench_load

clean:
	rm -rf $(OUT) .pytest_cache .hypothesis
