import os
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))      # tests/naive.py
ROOT = Path(__file__).resolve().parent.parent
os.environ.setdefault("OMP_NUM_THREADS", "1")


@pytest.fixture
def case_config():
    """Load a published-case config from configs/ with overrides."""
    from convsim.config import load_config

    def load(case, *overrides):
        return load_config(ROOT / "configs" / f"benchmark_case_{case}.toml", list(overrides))
    return load
