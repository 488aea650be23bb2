"""A corpus of malformed recording files, generated at test time (nothing binary is committed).

:mod:`corpus.make` builds every case into a temporary folder and states its
expected outcome: the project's error (a message pattern) or a correct read
(checked values). ``tests/test_corpus_readers.py`` runs them.
"""
