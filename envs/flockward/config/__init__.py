"""The configuration layer: config files and one-line errors, the key schema, scenario loading.

Turns TOML files into the simulator's validated records; knows nothing of Gymnasium or episodes.
"""
