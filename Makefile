# nullsteer: `make demo` and `make test` each do all the set-up on a fresh machine.
PYTHON ?= python3
VENV   := .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed-stamp
STUBS  := .stubs
STUBS_STAMP := $(STUBS)/.installed-stamp
DEMO_OUT ?= out/demo

.PHONY: all venv broker browser hamlib stubs typecheck test demo bench attack mutants clean

all: test

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/python -m pip install -q --upgrade pip
	$(BIN)/python -m pip install -q -e '.[dev,plot]'
	touch $@

venv: $(STAMP)

# The test fixture starts its own mosquitto on a free loopback port; it only has to be
# installed. The TLS tests make throw-away certificates with the openssl command line.
# Under CI (CI=true) a missing one fails the tests instead of skipping them.
broker:
	@if command -v mosquitto >/dev/null 2>&1 || [ -x /usr/sbin/mosquitto ]; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then \
	  echo "installing mosquitto (apt-get)"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq mosquitto >/dev/null; \
	else \
	  echo "mosquitto is not installed: install it (e.g. 'sudo apt-get install mosquitto') and rerun"; exit 1; \
	fi
	@if command -v openssl >/dev/null 2>&1; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then \
	  echo "installing openssl (apt-get)"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq openssl >/dev/null; \
	else \
	  echo "openssl is not installed: install it (e.g. 'sudo apt-get install openssl') and rerun"; exit 1; \
	fi

# The control page's browser test drives Debian's headless Chromium through its chromedriver
# (Selenium, from the dev extra). apt may be busy with another install: wait for its lock.
browser:
	@if [ -x /usr/bin/chromium ] && [ -x /usr/bin/chromedriver ]; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then \
	  echo "installing chromium and chromium-driver (apt-get)"; \
	  apt-get -o DPkg::Lock::Timeout=600 update -qq && \
	  DEBIAN_FRONTEND=noninteractive apt-get -o DPkg::Lock::Timeout=600 install -y -qq \
	    chromium chromium-driver >/dev/null; \
	else \
	  echo "chromium is not installed: install it (e.g. 'sudo apt-get install chromium chromium-driver') and rerun"; exit 1; \
	fi

# The receiver tests talk to Hamlib's rigctld with its dummy rig (-m 1) on loopback.
# apt/dpkg may be busy (another install): wait for its lock rather than fail.
hamlib:
	@if command -v rigctld >/dev/null 2>&1 || [ -x /usr/bin/rigctld ]; then :; \
	elif [ "$$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then \
	  echo "installing libhamlib-utils (apt-get)"; \
	  apt-get update -qq && DEBIAN_FRONTEND=noninteractive apt-get install -y -qq \
	    -o DPkg::Lock::Timeout=600 libhamlib-utils >/dev/null; \
	else \
	  echo "rigctld is not installed: install it (e.g. 'sudo apt-get install libhamlib-utils') and rerun"; exit 1; \
	fi

# MicroPython stubs live in a folder of their own: they shadow time, socket... in a venv.
$(STUBS_STAMP): | $(STAMP)
	$(BIN)/python -m pip install -q --target $(STUBS) micropython-rp2-stubs
	touch $@

stubs: $(STUBS_STAMP)

typecheck: venv stubs
	$(BIN)/python -m mypy
	bash firmware/typecheck.sh $(BIN)/python $(STUBS)

test: venv broker browser hamlib typecheck
	$(BIN)/python -m pytest -q

demo: venv
	$(BIN)/nullsteer demo --config examples/station.toml --out $(DEMO_OUT)

# The attack run: seeded, bounded fuzz, fault soak, power cuts and MQTT attacks on the real
# firmware and a real broker (127.0.0.1 only); prints its figures. A smoke part runs in test.
attack: venv broker
	$(BIN)/python tests/attack_suite.py --seed $${SEED:-1}

# Mutation run (not part of `make test`): curated mutants applied to a copy of the tree,
# the score and every survivor printed; see tools/mutants/run.py. MUTANTS_ARGS="--only ID".
mutants: venv broker
	$(BIN)/python tools/mutants/run.py $(MUTANTS_ARGS)

bench: venv
	@for b in benchmarks/bench_*.py; do echo "== $$b"; $(BIN)/python $$b || exit 1; done

clean:
	rm -rf $(VENV) $(STUBS) out .pytest_cache .mypy_cache
