"""Browser tests (a package, so its conftest is not imported as the top-level ``conftest`` that
tests/conftest.py provides to the other test modules)."""
