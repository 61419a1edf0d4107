"""Test-session settings shared by every folder."""

import os
import tempfile

# The gas-state memo (monitor.physics.gas_memo) goes to a folder of this test session, not the user's cache;
# subprocesses started by tests inherit it.
os.environ["EJECTA_CACHE_DIR"] = tempfile.mkdtemp(prefix="ejecta-test-memo-")
