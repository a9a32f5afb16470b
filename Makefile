# The front door: `make demo` runs the main job, `make test` runs the checks.
PYTHON ?= python3.11
VENV   := .venv
BIN    := $(VENV)/bin
# The CPU build of torch; a looser requirement would pull a multi-GB CUDA build.
TORCH  := torch==2.13.0
STAMP  := $(VENV)/.installed

.PHONY: demo test soak rllib-example lint type format bench results headon-curve standard-curve \
	ladder-curve clean

$(STAMP): pyproject.toml
	@echo "== creating the virtual environment $(VENV) (a few minutes the first time)"
	$(PYTHON) -m venv $(VENV)
	$(BIN)/pip install --progress-bar off --upgrade pip
	@echo "== installing $(TORCH) (CPU build)"
	$(BIN)/pip install --progress-bar off "$(TORCH)"
	@echo "== installing flockward and its test tools"
	$(BIN)/pip install --progress-bar off -e ".[test]" "$(TORCH)"
	touch $(STAMP)

demo: $(STAMP)
	$(BIN)/flockward demo

test: $(STAMP)
	$(BIN)/ruff check envs baselines tests examples scripts
	$(BIN)/ruff format --check envs baselines tests examples scripts
	$(BIN)/mypy
	$(BIN)/python -m pytest -q

# The long checks (a million random-action world-steps over every scenario); CI runs them too.
soak: $(STAMP)
	$(BIN)/python -m pytest -q -m expensive

# examples/train_rllib.py in a venv of its own: ray[rllib] pins an older gymnasium (1.2.2) than
# the main venv's, so it gets $(RLLIB_VENV), built like $(VENV) (the CPU torch first) with the pins
# of $(RLLIB_PINS). There the example's test must run (it fails, not skips, without RLlib), and
# flockward's Gymnasium-facing tests (the checkers, wrappers, vector env) run under that
# gymnasium. CI runs it.
RLLIB        := ray[rllib]==2.60.0
RLLIB_VENV   := .venv-rllib
RLLIB_BIN    := $(RLLIB_VENV)/bin
RLLIB_PINS   := examples/rllib-constraints.txt
RLLIB_STAMP  := $(RLLIB_VENV)/.installed

$(RLLIB_STAMP): pyproject.toml $(RLLIB_PINS)
	@echo "== creating the virtual environment $(RLLIB_VENV) for RLlib (about a minute)"
	rm -rf $(RLLIB_VENV)
	$(PYTHON) -m venv $(RLLIB_VENV)
	$(RLLIB_BIN)/pip install --progress-bar off --upgrade pip
	@echo "== installing $(TORCH) (CPU build)"
	$(RLLIB_BIN)/pip install --progress-bar off "$(TORCH)"
	@echo "== installing flockward with the learn extra, $(RLLIB) and the test tools ($(RLLIB_PINS))"
	$(RLLIB_BIN)/pip install --progress-bar off -c $(RLLIB_PINS) -e ".[learn]" "$(RLLIB)" \
		"$(TORCH)" pytest moviepy
	$(RLLIB_BIN)/pip list
	touch $(RLLIB_STAMP)

rllib-example: $(RLLIB_STAMP)
	$(RLLIB_BIN)/python -c "import gymnasium, ray; print('ray', ray.__version__, 'gymnasium', gymnasium.__version__)"
	FLOCKWARD_REQUIRE_EXAMPLES=train_rllib.py $(RLLIB_BIN)/python -m pytest -q \
		"tests/test_examples.py::test_example_runs[train_rllib.py]" tests/test_env.py tests/test_env_parts.py

lint: $(STAMP)
	$(BIN)/ruff check envs baselines tests examples scripts

type: $(STAMP)
	$(BIN)/mypy

format: $(STAMP)
	$(BIN)/ruff format envs baselines tests examples scripts
	$(BIN)/ruff check --fix envs baselines tests examples scripts

bench: $(STAMP)
	$(BIN)/flockward bench

# Regenerate every committed result with the shipped commands (tens of minutes on 2 cores): the
# standard suite played by each scripted baseline, its leaderboard, the field suite (teams, wind,
# sensing) and its leaderboard, the ladder suite (scripted baselines and the curriculum-trained
# models of results/models/ladder/) and its leaderboard, the herding envelope sweeps,
# the bench figures and the verification report (last: it exits non-zero when a check fails).
# Run it after any change to dynamics, reward, observation or a suite. The committed models
# (results/models/{ppo,sac}-*.zip) are played as they are: retrain them first when the change
# breaks them (`make standard-curve`, or one seed with `flockward train --config
# configs/train/ppo-standard.toml --seed S`, then copy model.zip).
BOARD_CONTROLLERS := boundary-arc collect-drive direct-pursuit idle no-drone
# Team baselines, played on the field suite (two-drone families) beside the one-drone ones.
TEAM_CONTROLLERS := sector-arc collect-drive-roles
results: $(STAMP)
	rm -f $(addprefix results/standard/,$(addsuffix .json,$(BOARD_CONTROLLERS)))
	rm -f results/standard/model-*.json
	for c in $(BOARD_CONTROLLERS); do \
		$(BIN)/flockward run --suite standard --controller $$c --workers 2 || exit 1; \
	done
	for m in $(wildcard results/models/ppo-*.zip); do \
		$(BIN)/flockward run --suite standard --model $$m --workers 2 || exit 1; \
	done
	for m in $(wildcard results/models/sac-*.zip); do \
		$(BIN)/flockward run --suite standard --model $$m --param algorithm=sac --workers 2 || exit 1; \
	done
	$(BIN)/flockward board --suite standard
	rm -f results/field/*.json
	for c in $(BOARD_CONTROLLERS) $(TEAM_CONTROLLERS); do \
		$(BIN)/flockward run --suite field --controller $$c --workers 2 || exit 1; \
	done
	$(BIN)/flockward run --suite field --controller boundary-arc --param information=sensed \
		--label boundary-arc-sensed --workers 2
	for m in $(wildcard results/models/ppo-*.zip); do \
		$(BIN)/flockward run --suite field --model $$m --workers 2 || exit 1; \
	done
	for m in $(wildcard results/models/sac-*.zip); do \
		$(BIN)/flockward run --suite field --model $$m --param algorithm=sac --workers 2 || exit 1; \
	done
	$(BIN)/flockward board --suite field
	rm -f results/ladder/*.json
	for c in $(BOARD_CONTROLLERS); do \
		$(BIN)/flockward run --suite ladder --controller $$c --workers 2 || exit 1; \
	done
	for m in $(wildcard results/models/ladder/ppo-*.zip); do \
		$(BIN)/flockward run --suite ladder --model $$m --workers 2 || exit 1; \
	done
	for m in $(wildcard results/models/ladder/sac-*.zip); do \
		$(BIN)/flockward run --suite ladder --model $$m --param algorithm=sac --workers 2 || exit 1; \
	done
	$(BIN)/flockward board --suite ladder
	rm -f results/sweeps/envelope-push-count.json
	$(BIN)/flockward sweep --scenario headon --controller boundary-arc \
		--axis push_distance=10:70:7 --axis flock.count=10,30,50,100 --seeds 20 \
		--name envelope-push-count --workers 2
	rm -f results/sweeps/envelope-push-approach.json
	$(BIN)/flockward sweep --scenario headon --controller boundary-arc \
		--axis push_distance=10:70:7 --axis site.goal_bearing_deg=30,60,90,120,150,180 \
		--seeds 10 --name envelope-push-approach --workers 2
	rm -f results/sweeps/envelope-push-speed.json
	$(BIN)/flockward sweep --scenario headon --controller boundary-arc \
		--axis push_distance=10:70:7 --axis flock.cruise_speed=7.5:17.5:5 \
		--seeds 10 --name envelope-push-speed --workers 2
	$(BIN)/python scripts/envelope_bands.py
	$(BIN)/python scripts/approach_angles.py
	$(BIN)/flockward bench > results/bench.tmp && mv results/bench.tmp results/bench.txt
	$(BIN)/flockward verify; status=$$?; $(BIN)/python scripts/readme_tables.py; exit $$status

# PPO from scratch on headon, seeds 0, 1 and 2 one after another (about 10 minutes each on 2
# cores; runs/ppo-headon-s* are replaced), then their mean learning curve and the table of when
# each seed first reached 90 % success: results/models/ppo-headon-curve.{csv,png,md}.
headon-curve: $(STAMP)
	for s in 0 1 2; do \
		rm -rf runs/ppo-headon-s$$s; \
		$(BIN)/flockward train --config configs/train/ppo-headon.toml --seed $$s --quiet || exit 1; \
	done
	$(BIN)/flockward curves runs/ppo-headon-s0 runs/ppo-headon-s1 runs/ppo-headon-s2 \
		--out results/models/ppo-headon-curve --title "PPO from scratch on headon"
	$(BIN)/python scripts/readme_tables.py

# The standard leaderboard's learned references, from scratch on the standard mix: PPO
# (configs/train/ppo-standard.toml) and SAC (sac-standard.toml), seeds 0, 1 and 2 each, one after
# another (runs/*-standard-s* are replaced). The models are copied to results/models/, then each
# config's mean learning curve and the table of when each seed's success over the nine scenarios
# first reached 60 % are written: results/models/{ppo,sac}-standard-curve.*. `make results` then
# plays the models on the standard and field suites.
standard-curve: $(STAMP)
	for c in ppo-standard sac-standard; do \
		for s in 0 1 2; do \
			rm -rf runs/$$c-s$$s; \
			$(BIN)/flockward train --config configs/train/$$c.toml --seed $$s --quiet || exit 1; \
			cp runs/$$c-s$$s/model.zip results/models/$$c-s$$s.zip; \
		done; \
		$(BIN)/flockward curves runs/$$c-s0 runs/$$c-s1 runs/$$c-s2 --target 0.6 \
			--out results/models/$$c-curve --title "From scratch on the standard mix: $$c" \
			|| exit 1; \
	done
	$(BIN)/python scripts/readme_tables.py

# From scratch on the ladder suite: PPO with the curriculum (configs/train/ppo-ladder.toml) and
# without it (ppo-ladder-uniform.toml), SAC with it (sac-ladder.toml); seeds 0, 1 and 2 each,
# one after another (10 to 30 minutes each on 2 cores; runs/*-ladder*-s* are replaced). The models
# (and the curriculum's worlds per tier) are copied to results/models/ladder/; then each config's
# mean learning curve and the table of when each seed's success over the eleven ladder families
# first reached 60 % are written: results/models/{ppo-ladder,ppo-ladder-uniform,sac-ladder}-curve.*.
# `make results` then plays the models on the ladder suite.
ladder-curve: $(STAMP)
	mkdir -p results/models/ladder
	for c in ppo-ladder ppo-ladder-uniform sac-ladder; do \
		for s in 0 1 2; do \
			rm -rf runs/$$c-s$$s; \
			$(BIN)/flockward train --config configs/train/$$c.toml --seed $$s --quiet || exit 1; \
			cp runs/$$c-s$$s/model.zip results/models/ladder/$$c-s$$s.zip; \
			if [ -f runs/$$c-s$$s/curriculum.csv ]; then \
				cp runs/$$c-s$$s/curriculum.csv results/models/ladder/$$c-s$$s-tiers.csv; \
			fi; \
		done; \
		$(BIN)/flockward curves runs/$$c-s0 runs/$$c-s1 runs/$$c-s2 --target 0.6 \
			--out results/models/$$c-curve --title "From scratch on the ladder: $$c" || exit 1; \
	done
	$(BIN)/python scripts/readme_tables.py

clean:
	rm -rf $(VENV) $(RLLIB_VENV) build dist .pytest_cache .ruff_cache
