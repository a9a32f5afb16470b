"""The simulator layer: parameter records, the step kernel, the batched world, geometry, metrics.

Knows nothing of files, Gymnasium or rewards; every layer above builds on it.
"""
