"""Sampling engine: points, batches, stopping, executors."""
