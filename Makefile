# nbledger: the two commands of the README, and the steps they are made of.
#   make demo   builds the demo end to end (installs first if needed)
#   make test   installs everything and runs the tests

PYTHON ?= python3
VENV := .venv
BIN := $(VENV)/bin
STAMP := $(VENV)/.installed
OUT := demo_out
# System libraries WeasyPrint (the PDF report) needs, and fonts for pictures.
SYSTEM_PACKAGES := libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz0b fonts-dejavu-core \
	poppler-utils chromium postgresql
# (poppler-utils: pdftoppm for the README's picture; chromium: the tests that open the HTML twin and the
# review desk; postgresql: the review desk's tests start a PostgreSQL server of their own)

.PHONY: demo test install system-packages benchmark clean docs-picture

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
	$(BIN)/nbledger demo --out $(OUT)
	$(BIN)/nbledger why $(OUT)/tideway.skops --file demo_corpus/examples/borderline.txt
	$(BIN)/nbledger why $(OUT)/tideway.skops --file demo_corpus/examples/notice.eml --text-view body
	@echo "demo outputs are in $(OUT)/"

# The README's picture of the report: its summary page (page 2: the contents share the cover), from the demo's PDF.
docs-picture: demo
	pdftoppm -png -r 70 -f 2 -l 2 -singlefile $(OUT)/report.pdf docs/report_summary

benchmark: install
	$(BIN)/python -m benchmarks.bench_evidence
	$(BIN)/python -m benchmarks.bench_vocab
	$(BIN)/python -m benchmarks.bench_assess
	$(BIN)/python -m benchmarks.bench_email
	$(BIN)/python -m benchmarks.bench_report
	$(BIN)/python -m benchmarks.bench_load

clean:
	rm -rf $(OUT) .pytest_cache .hypothesis
