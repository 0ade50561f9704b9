"""The bad-input corpus: damaged recordings, settings and results files, and the command each one
must fail on cleanly (``make_corpus.py`` builds them; ``tests/test_corpus.py`` runs them)."""
