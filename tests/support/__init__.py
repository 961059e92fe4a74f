"""Test helpers: builders, tool probes, the model-and-C pair, proof-suite support."""
