"""The version of the simulation model: dynamics, reward and observation together.

Scenario and suite hashes include it, so result files played under an older model are refused
rather than compared with new ones. Bump it whenever the same scenario and seed could give a
different episode: a change to the step kernel, reset sampling, reward terms, observation layout
or the end-of-episode rules. A new parameter whose default reproduces today's behaviour needs no
bump (hashes leave out values equal to a record's default).
"""

MODEL_VERSION = 2
