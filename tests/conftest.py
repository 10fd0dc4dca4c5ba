"""Test-wide set-up: the persistent table cache lives in a fresh temporary folder for each test run,
so results never depend on tables left by earlier runs or by the user's own work."""
import os
import tempfile

os.environ.setdefault("LOWGMAP_CACHE_DIR", tempfile.mkdtemp(prefix="lowgmap-test-cache-"))
