"""Acceptance tests for issue 9, written from the issue and its contract: boards as sketches print them."""
