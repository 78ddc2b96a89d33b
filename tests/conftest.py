"""Shared test settings."""

from hypothesis import settings

# A loaded 2-core CI machine can take longer than hypothesis' default 200 ms per example; speed is
# measured by the benchmarks, never by the tests.
settings.register_profile("turnkit", deadline=None, print_blob=True)
settings.load_profile("turnkit")
