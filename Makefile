# Shardline: set-up, demo and tests. `make demo` and `make test` do all set-up on a fresh machine.
PYTHON ?= python3
VENV   ?= .venv
BIN    := $(VENV)/bin
STAMP  := $(VENV)/.installed-stamp

.PHONY: setup demo test bench clean

setup: $(STAMP)

$(STAMP): pyproject.toml
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --quiet --upgrade pip
	$(BIN)/pip install --quiet -e '.[test,spark,report]'
	touch $(STAMP)

# The demo runs the Spark engine on local Spark (distributed mode), then scores its output.
demo: setup
	$(BIN)/shardline run datasets/demo/larkspur-bay-rides.csv.gz --weight-column rides -k 8 --imbalance 0.03 --seed 1 --engine spark -o out/demo/docks-to-shards.parquet
	$(BIN)/shardline score datasets/demo/larkspur-bay-rides.csv.gz --weight-column rides out/demo/docks-to-shards.parquet --imbalance 0.03

test: setup
	$(BIN)/python -m pytest -q -p no:cacheprovider

clean:
	rm -rf $(VENV) out .pytest_cache
