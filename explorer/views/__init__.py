"""Thin viewers of the explorer's results: each owns its streams and pushes new data in place."""
