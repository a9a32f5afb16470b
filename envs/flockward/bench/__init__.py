"""The benchmark layer: suites, playing episodes, the runner and its backends, leaderboards.

Knows nothing of the command line.
"""
