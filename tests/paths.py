"""Where the repository and its bundled sample traces are, for tests in any folder."""
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "sample_traces"
