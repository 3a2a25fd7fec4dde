"""Batch stage: shot plan, content-hash keys, manifest, lock, runner and executors."""
