"""The proof suite's published parts: plant strategies and the bounds the properties state.

``strategies`` (hypothesis strategies drawing servable plants; also importable as
``harness.strategies``) and ``bounds``. PROOFS.md says what is proved and how to run the
strategies against your own port.
"""
